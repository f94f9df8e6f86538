/**
 * Spec semantics shared by simulation, the estimator and dosing: parameter transforms,
 * covariate shifts and typical individual parameters (DESIGN.md section 4):
 *   phi = mu + sum of covariate shifts (+ eta),  psi = h(phi),
 * where phi is the transformed scale and psi the natural scale (CL in L/h, F a fraction).
 */
import { structuralModelWithSolver } from '../models/catalogue.js';
import type { PkParameterName, StructuralModel, Transform } from '../models/types.js';
import type { CovariateValue, Dose } from '../data/types.js';
import type { CovariateEffectSpec, ModelSpec } from './modelSpec.js';

/** psi (natural scale) -> phi (transformed scale): log, logit or identity. NaN outside the domain. */
export function naturalToTransformed(t: Transform, psi: number): number {
  if (t === 'log') return psi > 0 ? Math.log(psi) : NaN;
  if (t === 'logit') return psi > 0 && psi < 1 ? Math.log(psi / (1 - psi)) : NaN;
  return psi;
}

/** phi (transformed scale) -> psi (natural scale): exp, inverse logit or identity. */
export function transformedToNatural(t: Transform, phi: number): number {
  if (t === 'log') return Math.exp(phi);
  if (t === 'logit') return phi >= 0 ? 1 / (1 + Math.exp(-phi)) : Math.exp(phi) / (1 + Math.exp(phi));
  return phi;
}

/** Thrown when a covariate value needed by a relation is missing or of the wrong kind. */
export class CovariateValueError extends Error {
  readonly covariate: string;
  readonly parameter: PkParameterName;
  readonly subject?: string;
  /** The message without the subject, for reports that name the subject themselves. */
  readonly reason: string;
  constructor(effect: CovariateEffectSpec, message: string, subject?: string) {
    const reason = `covariate ${effect.covariate} (on ${effect.parameter}): ${message}`;
    super(`${subject !== undefined ? `subject ${subject}: ` : ''}${reason}`);
    this.name = 'CovariateValueError';
    this.reason = reason;
    this.covariate = effect.covariate;
    this.parameter = effect.parameter;
    if (subject !== undefined) this.subject = subject;
  }
}

/**
 * Shift on the transformed scale of `effect.parameter` for one covariate value:
 * power: coefficient * log(value / reference); linear: coefficient * (value - reference);
 * categorical: coefficients[level] for a non-reference level, 0 for the reference or an
 * unlisted level. A missing value throws CovariateValueError (callers add the subject).
 */
export function covariateShift(effect: CovariateEffectSpec, value: CovariateValue | undefined, subject?: string): number {
  if (value === undefined || value === '') throw new CovariateValueError(effect, 'no value for this subject; add it to the data or remove the relation', subject);
  if (effect.relation === 'categorical') {
    const level = String(value);
    if (level === String(effect.reference)) return 0;
    const coefs = effect.coefficients;
    return coefs !== undefined && Object.prototype.hasOwnProperty.call(coefs, level) ? coefs[level] : 0;
  }
  if (typeof value !== 'number' || !Number.isFinite(value)) {
    throw new CovariateValueError(effect, `a ${effect.relation} relation needs a number, got ${JSON.stringify(value)}`, subject);
  }
  const reference = effect.reference as number;
  const coefficient = effect.coefficient ?? 0;
  if (effect.relation === 'power') {
    if (!(value > 0)) throw new CovariateValueError(effect, `a power relation needs a value > 0, got ${value}`, subject);
    return coefficient * Math.log(value / reference);
  }
  return coefficient * (value - reference);
}

/**
 * Typical individual parameters on the natural scale for one subject's covariates:
 * h(mu + sum of shifts) for every parameter of the spec, then absent parameters with a
 * catalogue default (tlag 0, F 1); absent parameters without one (ka) are NaN.
 * The result holds the model's parameters only, in a null-prototype record.
 */
export function typicalIndividualParameters(
  spec: ModelSpec,
  covariates: Readonly<Record<string, CovariateValue>>,
  subject?: string,
  model: StructuralModel = structuralModelWithSolver(spec.structure, spec.solver),
): Record<PkParameterName, number> {
  const out = Object.create(null) as Record<PkParameterName, number>;
  for (const info of model.parameters) {
    const p = spec.parameters[info.name];
    if (!p) {
      out[info.name] = info.defaultWhenAbsent ?? NaN;
      continue;
    }
    let shift = 0;
    for (const effect of spec.covariates) {
      if (effect.parameter !== info.name) continue;
      const value = Object.prototype.hasOwnProperty.call(covariates, effect.covariate) ? covariates[effect.covariate] : undefined;
      shift += covariateShift(effect, value, subject);
    }
    // No shift: the typical value itself, not exp(log(typical)) with its rounding.
    out[info.name] = shift === 0 ? p.typical : transformedToNatural(p.transform, naturalToTransformed(p.transform, p.typical) + shift);
  }
  return out;
}

/** Parameter values as the model's vector, in `model.parameterOrder` (missing -> NaN). */
export function toModelVector(model: StructuralModel, values: Readonly<Partial<Record<PkParameterName, number>>>): Float64Array {
  const v = new Float64Array(model.parameterOrder.length);
  model.parameterOrder.forEach((name, i) => {
    const x = values[name];
    v[i] = typeof x === 'number' ? x : NaN;
  });
  return v;
}

/**
 * Problems with a parameter set for one dosing history: a disposition parameter missing or
 * not > 0, ka missing when there are oral doses, F outside (0, 1], tlag < 0. Each names the
 * parameter and says what to do.
 */
export function checkIndividualParameters(
  model: StructuralModel,
  values: Readonly<Partial<Record<PkParameterName, number>>>,
  doses: readonly Dose[],
): { parameter: PkParameterName; message: string }[] {
  const problems: { parameter: PkParameterName; message: string }[] = [];
  const oral = doses.some((d) => d.route === 'oral');
  for (const name of model.parameterOrder) {
    const x = values[name];
    const absorption = name === 'ka' || name === 'tlag' || name === 'F';
    if (absorption && !oral) continue;
    if (x === undefined || Number.isNaN(x)) {
      problems.push({
        parameter: name,
        message: name === 'ka' ? 'the data hold oral doses, so the model needs ka: add "ka" to the spec parameters' : `${name} has no value: add it to the spec parameters`,
      });
    } else if (!Number.isFinite(x)) problems.push({ parameter: name, message: `${name} is not finite (${x})` });
    else if (name === 'tlag' ? x < 0 : !(x > 0)) problems.push({ parameter: name, message: `${name} must be ${name === 'tlag' ? '>= 0' : '> 0'}, got ${x}` });
    else if (name === 'F' && x > 1) problems.push({ parameter: name, message: `F is a fraction and must be <= 1, got ${x}` });
  }
  return problems;
}

/**
 * Per-subject parameter values given in the data: a numeric covariate named exactly like one
 * of the model's parameters (e.g. a column `CL`) overrides the typical value for that subject.
 */
export function parameterOverridesFromCovariates(
  model: StructuralModel,
  covariates: Readonly<Record<string, CovariateValue>>,
): Partial<Record<PkParameterName, CovariateValue>> {
  const out = Object.create(null) as Partial<Record<PkParameterName, CovariateValue>>;
  for (const name of model.parameterOrder) {
    if (Object.prototype.hasOwnProperty.call(covariates, name)) out[name] = covariates[name];
  }
  return out;
}
