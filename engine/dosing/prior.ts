/**
 * One patient's prior from the population model: phi = mu + beta . x + eta, eta ~ N(0, Omega),
 * psi = h(phi), with the shared spec semantics of engine/spec/individual.ts. Built once per patient; `toModelVector` is
 * the hot-loop map from eta to the structural model's parameter vector.
 */
import type { CovariateValue } from '../data/types.js';
import { cholesky, inverseSpd, logDetFromCholesky } from '../linalg/index.js';
import type { PkParameterName, StructuralModel, Transform } from '../models/types.js';
import { covariateShift, CovariateValueError, naturalToTransformed, transformedToNatural } from '../spec/individual.js';
import type { ResidualModelId } from '../spec/modelSpec.js';
import type { PopulationModel } from './population.js';

export interface PriorParameter {
  name: PkParameterName;
  transform: Transform;
  /** Position in the structural model's vector. */
  modelIndex: number;
  /** Index of its random effect, -1 without BSV. */
  etaIndex: number;
  /** Typical value for this patient (covariates applied), transformed scale. */
  phiMean: number;
}

export interface PatientPrior {
  model: StructuralModel;
  parameters: readonly PriorParameter[];
  nEta: number;
  /** Parameter name of each random effect. */
  etaNames: readonly PkParameterName[];
  /** nEta x nEta row-major prior covariance, its lower Cholesky factor and inverse. */
  omega: Float64Array;
  omegaChol: Float64Array;
  omegaInv: Float64Array;
  logDetOmega: number;
  residual: { model: ResidualModelId; a: number; b: number };
  /** Fill the structural model's parameter vector from eta; false outside the domain. */
  toModelVector(eta: ArrayLike<number>, out: Float64Array): boolean;
  /** Typical (eta = 0) natural-scale value of each spec parameter for this patient. */
  typical: Record<string, number>;
}

export class PriorError extends Error {
  readonly problems: readonly string[];
  constructor(problems: readonly string[]) {
    super(`the model cannot be applied to this patient:\n${problems.map((p) => `  ${p}`).join('\n')}`);
    this.name = 'PriorError';
    this.problems = problems;
  }
}

/**
 * Build the patient's prior. `covariates` maps the model's covariate names to the patient's
 * values (the caller resolves names and units); a missing or unusable value is an error.
 */
export function buildPatientPrior(population: PopulationModel, covariates: ReadonlyMap<string, CovariateValue>, model: StructuralModel): PatientPrior {
  const spec = population.spec;
  const problems: string[] = [];
  const parameters: PriorParameter[] = [];
  const etaNames: PkParameterName[] = [];
  const byName = new Map<string, PriorParameter>();
  for (const [name, ps] of Object.entries(spec.parameters)) {
    if (!ps) continue;
    const modelIndex = model.parameterOrder.indexOf(name as PkParameterName);
    if (modelIndex < 0) {
      problems.push(`parameters.${name}: not a parameter of ${model.id}`);
      continue;
    }
    const p: PriorParameter = { name: name as PkParameterName, transform: ps.transform, modelIndex, etaIndex: ps.bsv !== null ? etaNames.length : -1, phiMean: naturalToTransformed(ps.transform, ps.typical) };
    if (ps.bsv !== null) etaNames.push(p.name);
    parameters.push(p);
    byName.set(name, p);
  }
  for (const c of spec.covariates) {
    const p = byName.get(c.parameter);
    if (!p) continue;
    const v = covariates.get(c.covariate);
    if (v === undefined) {
      problems.push(`covariate ${c.covariate} (on ${c.parameter}): the patient has no value; add it to patient.json covariates`);
      continue;
    }
    if (c.relation === 'categorical') {
      // An unlisted level would silently take the reference value: refuse it instead.
      const level = String(v);
      const coefs = c.coefficients ?? {};
      if (level !== String(c.reference) && !Object.prototype.hasOwnProperty.call(coefs, level)) {
        problems.push(`covariate ${c.covariate} (on ${c.parameter}): level "${level}" is not one the model knows (reference "${c.reference}", others: ${Object.keys(coefs).join(', ') || 'none'})`);
        continue;
      }
    }
    try {
      p.phiMean += covariateShift(c, v);
    } catch (e) {
      if (e instanceof CovariateValueError) problems.push(e.reason);
      else throw e;
    }
  }
  const nEta = etaNames.length;
  const omega = new Float64Array(nEta * nEta);
  for (const p of parameters) if (p.etaIndex >= 0) omega[p.etaIndex * (nEta + 1)] = (spec.parameters[p.name]!.bsv as number) ** 2;
  for (const [key, r] of Object.entries(spec.correlationValues ?? {})) {
    const [a, b] = key.split(',').map((s) => byName.get(s.trim()));
    if (!a || !b || a.etaIndex < 0 || b.etaIndex < 0) {
      problems.push(`correlationValues."${key}": both parameters need BSV`);
      continue;
    }
    const c = r * Math.sqrt(omega[a.etaIndex * (nEta + 1)] * omega[b.etaIndex * (nEta + 1)]);
    omega[a.etaIndex * nEta + b.etaIndex] = c;
    omega[b.etaIndex * nEta + a.etaIndex] = c;
  }
  const omegaChol = new Float64Array(nEta * nEta);
  const omegaInv = new Float64Array(nEta * nEta);
  if (nEta > 0 && !(cholesky(omega, nEta, omegaChol) && inverseSpd(omega, nEta, omegaInv))) problems.push('the BSV covariance (Omega) is not positive definite; check the correlation values');

  // Absent structural parameters take their defaults (tlag 0, F 1); ka is required only for oral doses.
  const defaults = new Float64Array(model.parameterOrder.length);
  model.parameterOrder.forEach((name, k) => {
    if (byName.has(name)) return;
    const info = model.parameters.find((x) => x.name === name);
    defaults[k] = info?.defaultWhenAbsent ?? NaN;
  });
  for (const p of parameters) if (!Number.isFinite(p.phiMean)) problems.push(`parameter ${p.name}: the typical value for this patient is not finite; check the covariate values and coefficients`);
  if (problems.length) throw new PriorError(problems);

  const toModelVector = (eta: ArrayLike<number>, out: Float64Array): boolean => {
    for (let k = 0; k < defaults.length; k++) out[k] = defaults[k];
    for (let j = 0; j < parameters.length; j++) {
      const p = parameters[j];
      const phi = p.etaIndex >= 0 ? p.phiMean + eta[p.etaIndex] : p.phiMean;
      const v = transformedToNatural(p.transform, phi);
      if (!Number.isFinite(v)) return false;
      out[p.modelIndex] = v;
    }
    return true;
  };
  const typical: Record<string, number> = Object.create(null);
  for (const p of parameters) typical[p.name] = transformedToNatural(p.transform, p.phiMean);
  const res = spec.residual;
  return {
    model, parameters, nEta, etaNames, omega, omegaChol, omegaInv,
    logDetOmega: nEta > 0 ? logDetFromCholesky(omegaChol, nEta) : 0,
    residual: { model: res.model, a: res.a ?? 0, b: res.b ?? 0 },
    toModelVector, typical,
  };
}
