/**
 * The population model used as the prior: a site fit (the estimator's fit.json, whose estimates
 * replace the spec's initial values) or a model spec entered from the literature (its typical,
 * bsv, covariate and residual values are the population values). Carries its provenance and
 * the covariate ranges it was built on.
 */
import { wrongKindMessage } from '../spec/fileKind.js';
import { literatureStatus } from '../spec/literature.js';
import { implausibleTypical, parseModelSpec, PLAUSIBLE, type ModelSpec } from '../spec/modelSpec.js';
import { parseFitSubjects, type FitSubjectPosterior } from './posterior.js';

export interface ModelProvenance {
  kind: 'site fit' | 'model spec';
  name?: string;
  /** Free-text source (publication, site and period). */
  source?: string;
  engineVersion?: string;
  dataHash?: string;
  seed?: number | string;
  /** Warnings the fit itself reported. */
  fitWarnings?: string[];
  /** Set on advice whose posterior is a fitted subject's post-fit draws (which subject, how many). */
  posteriorFrom?: string;
}

export interface PopulationModel {
  spec: ModelSpec;
  provenance: ModelProvenance;
  /** Covariate name -> [min, max] the model was built on; null when unknown. */
  covariateRanges: Record<string, [number, number]> | null;
  /** Problems with the model as a prior (no source, poorly estimated values); shown as flags. */
  warnings: string[];
  /** Checks of a fit's fitness as a prior, with their severity (a fit that says "do not use" blocks). */
  checks?: ModelCheck[];
  /** A site fit's subjects (id -> post-fit draws and the levels the fit saw); absent for a model spec. */
  fitSubjects?: ReadonlyMap<string, FitSubjectPosterior>;
}

export interface ModelCheck {
  severity: 'block' | 'flag' | 'note';
  code: string;
  message: string;
}

/** BSV (SD on the transformed scale) below this has collapsed: the prior pins the patient to the typical value (common practice). */
export const COLLAPSED_BSV = 0.01;

export class PopulationModelError extends Error {
  readonly problems: readonly string[];
  constructor(problems: readonly string[]) {
    super(`invalid model file:\n${problems.map((p) => `  ${p}`).join('\n')}`);
    this.name = 'PopulationModelError';
    this.problems = problems;
  }
}

const isRecord = (x: unknown): x is Record<string, unknown> => typeof x === 'object' && x !== null && !Array.isArray(x);
const finite = (x: unknown): x is number => typeof x === 'number' && Number.isFinite(x);

/** A fit.json or a model spec, told apart by the fit's `population` table. */
export function loadPopulationModel(json: unknown): PopulationModel {
  const wrong = wrongKindMessage(json, ['model spec', 'fit.json']);
  if (wrong) throw new PopulationModelError([`${wrong}: give a model spec (JSON with structure, parameters, residual) or a fit.json written by plateau fit`]);
  if (isRecord(json) && Array.isArray(json.population) && json.spec !== undefined) return populationModelFromFit(json);
  return populationModelFromSpec(parseModelSpec(json));
}

function parseRanges(raw: unknown, at: string, problems: string[]): Record<string, [number, number]> | undefined {
  if (raw === undefined || raw === null) return undefined;
  if (!isRecord(raw)) {
    problems.push(`${at}: must map covariate -> [min, max]`);
    return undefined;
  }
  const out: Record<string, [number, number]> = Object.create(null);
  for (const [k, v] of Object.entries(raw)) {
    if (Array.isArray(v) && v.length === 2 && finite(v[0]) && finite(v[1]) && v[0] <= v[1]) out[k] = [v[0], v[1]];
    else if (isRecord(v) && finite(v.min) && finite(v.max) && v.min <= v.max) out[k] = [v.min, v.max];
    else problems.push(`${at}.${k}: must be [min, max]`);
  }
  return out;
}

export function populationModelFromSpec(spec: ModelSpec): PopulationModel {
  const warnings: string[] = [];
  const checks: ModelCheck[] = [];
  const source = spec.source ?? spec.literature?.citation;
  if (!source) warnings.push('the model spec has no "source": record where the model comes from (publication, site fit) before using it for dosing');
  if (spec.literature) {
    const st = literatureStatus(spec.literature, spec);
    if (st.verified) checks.push({ severity: 'note', code: 'literature-verified', message: `published model: ${st.reason}` });
    else
      checks.push({
        severity: 'block',
        code: 'literature-unverified',
        message: `published model not verified: ${st.reason}. A named user checks every value against the publication, corrects the file, then records it with: plateau models --verify <file> --by <name>`,
      });
  }
  return {
    spec,
    provenance: { kind: 'model spec', ...(spec.name ? { name: spec.name } : {}), ...(source ? { source } : {}) },
    covariateRanges: spec.covariateRanges ?? null,
    warnings,
    checks,
  };
}

/**
 * Convert the estimator's fit.json: population entries (typical: natural-scale typical value;
 * bsv: SD on the transformed scale; correlation: parameter "P1,P2"; covariate: coefficient on
 * the transformed scale, categorical levels as covariate "name=level"; residual: parameter a or b)
 * replace the spec's values.
 */
export function populationModelFromFit(fit: Record<string, unknown>): PopulationModel {
  const problems: string[] = [];
  let spec: ModelSpec;
  try {
    spec = parseModelSpec(fit.spec);
  } catch (e) {
    throw new PopulationModelError([`spec: ${(e as Error).message}`]);
  }
  const params = { ...spec.parameters };
  for (const k of Object.keys(params)) params[k as keyof typeof params] = { ...params[k as keyof typeof params]! };
  const covariates = spec.covariates.map((c) => ({ ...c, ...(c.coefficients ? { coefficients: { ...c.coefficients } } : {}) }));
  const correlationValues: Record<string, number> = Object.assign(Object.create(null), spec.correlationValues ?? {});
  const residual = { ...spec.residual };
  const seenTypical = new Set<string>();
  (fit.population as unknown[]).forEach((e, i) => {
    const at = `population[${i}]`;
    if (!isRecord(e) || typeof e.parameter !== 'string') return void problems.push(`${at}: must be {parameter, kind, estimate}`);
    // JSON writes NaN and Infinity as null: a non-finite estimate means the fit failed.
    if (!finite(e.estimate))
      return void problems.push(`${at}: the estimate of ${String(e.kind)} ${e.parameter} is not finite (${JSON.stringify(e.estimate ?? null)}): the fit failed and cannot be used as a prior; refit the model`);
    const name = e.parameter;
    const est = e.estimate;
    switch (e.kind) {
      case 'typical': {
        const p = params[name as keyof typeof params];
        if (!p) return void problems.push(`${at}: typical value for ${name}, which the spec does not have`);
        const why = implausibleTypical(name, est);
        if (why) return void problems.push(`${at}: the fitted typical ${name} ${why}: the fit cannot be used as a prior; refit the model`);
        p.typical = est;
        seenTypical.add(name);
        return;
      }
      case 'bsv': {
        const p = params[name as keyof typeof params];
        if (!p) return void problems.push(`${at}: BSV for ${name}, which the spec does not have`);
        if (!(est > 0)) return void problems.push(`${at}: BSV of ${name} must be > 0, got ${est}`);
        if (est > PLAUSIBLE.bsvMax) return void problems.push(`${at}: BSV of ${name} is ${est}, implausibly large (at most ${PLAUSIBLE.bsvMax} on the transformed scale): the fit cannot be used as a prior`);
        p.bsv = est;
        return;
      }
      case 'correlation': {
        if (!(est > -1 && est < 1)) return void problems.push(`${at}: correlation ${name} must lie in (-1, 1)`);
        correlationValues[name.replace(/\s+/g, '')] = est;
        return;
      }
      case 'covariate': {
        const cov = typeof e.covariate === 'string' ? e.covariate : '';
        const [cname, level] = cov.split('=');
        const c = covariates.find((x) => x.parameter === name && x.covariate === cname);
        if (!c) return void problems.push(`${at}: covariate effect ${name}~${cov} is not in the spec`);
        if (Math.abs(est) > PLAUSIBLE.coefficientAbsMax) return void problems.push(`${at}: covariate effect ${name}~${cov} is ${est}, implausibly large (at most +-${PLAUSIBLE.coefficientAbsMax}): the fit cannot be used as a prior`);
        if (c.relation === 'categorical') {
          if (!level) return void problems.push(`${at}: categorical effect ${name}~${cname} needs covariate "${cname}=<level>"`);
          c.coefficients = { ...(c.coefficients ?? {}), [level]: est };
        } else c.coefficient = est;
        return;
      }
      case 'residual': {
        if (name === 'a' || name === 'b') {
          const max = name === 'a' ? PLAUSIBLE.residualAMax : PLAUSIBLE.residualBMax;
          if (!(est > 0 && est <= max)) return void problems.push(`${at}: residual ${name} is ${est}, outside (0, ${max}]: a collapsed or exploded residual error; the fit cannot be used as a prior`);
          residual[name] = est;
        }
        else problems.push(`${at}: residual parameter must be a or b, got ${name}`);
        return;
      }
      default:
        problems.push(`${at}.kind: must be typical, bsv, correlation, covariate or residual`);
    }
  });
  for (const name of Object.keys(params)) if (!seenTypical.has(name) && !params[name as keyof typeof params]!.fixed) problems.push(`population: no estimate of the typical ${name}; the fit file is incomplete`);
  const ranges = parseRanges(fit.covariateRanges ?? (isRecord(fit.dataset) ? fit.dataset.covariateRanges : undefined), 'covariateRanges', problems);
  if (problems.length) throw new PopulationModelError(problems);
  const warnings: string[] = [];
  const covariateRanges = ranges ?? spec.covariateRanges ?? null;
  const fitWarnings = Array.isArray(fit.warnings) ? fit.warnings.map((w) => (typeof w === 'string' ? w : JSON.stringify(w))) : [];
  const checks = fitChecks(fit, fitWarnings);
  // Poorly estimated population values make the prior unreliable (50 % RSE: common practice).
  for (const e of fit.population as Array<Record<string, unknown>>) {
    if (isRecord(e) && finite(e.rsePercent) && e.rsePercent > 50)
      warnings.push(`the fit estimated ${e.kind} ${e.parameter}${typeof e.covariate === 'string' ? `~${e.covariate}` : ''} with ${Math.round(e.rsePercent)} % RSE: the prior rests on a poorly determined value`);
  }
  const merged: ModelSpec = {
    ...spec,
    parameters: params,
    covariates,
    ...(Object.keys(correlationValues).length ? { correlationValues } : {}),
    residual,
    ...(covariateRanges ? { covariateRanges } : {}),
  };
  return {
    spec: merged,
    provenance: {
      kind: 'site fit',
      ...(spec.name ? { name: spec.name } : {}),
      source: spec.source ?? `site fit${typeof fit.dataHash === 'string' ? ` of dataset ${fit.dataHash}` : ''}`,
      ...(typeof fit.engineVersion === 'string' ? { engineVersion: fit.engineVersion } : {}),
      ...(typeof fit.dataHash === 'string' ? { dataHash: fit.dataHash } : {}),
      ...(finite(fit.seed) || typeof fit.seed === 'string' ? { seed: fit.seed as number | string } : {}),
      ...(fitWarnings.length ? { fitWarnings } : {}),
    },
    covariateRanges,
    warnings,
    checks,
    fitSubjects: parseFitSubjects(fit),
  };
}

/**
 * Fit warnings about the post-fit diagnostics only (a second standard-error method, the
 * likelihood by importance sampling or linearisation, NPDE and VPC simulation, conditional
 * modes): they do not change the population values a prior uses, so they are notes, not FLAGs.
 * Warnings about the estimates themselves (non-finite, cap reached, Omega, the primary
 * standard errors) stay FLAGs.
 */
const POST_FIT_INTERNAL = /^\(second method\)|^linearis(ed|ation)\b|^importance sampling\b|^NPDE\b|^simulation:|^conditional mode\b/i;

/**
 * Is the fit fit to be a prior? A fit whose own record says not to use it blocks; a search
 * that hit its iteration cap, missing standard errors and a collapsed BSV are flagged by name.
 * Every warning the fit reported is listed with its text.
 */
function fitChecks(fit: Record<string, unknown>, fitWarnings: readonly string[]): ModelCheck[] {
  const out: ModelCheck[] = [];
  for (const w of fitWarnings) {
    if (/do not use/i.test(w)) out.push({ severity: 'block', code: 'fit-unusable', message: `the fit's record says it must not be used: "${w}"; refit the model before using it for dosing` });
    else if (POST_FIT_INTERNAL.test(w)) out.push({ severity: 'note', code: 'fit-note', message: `the fit noted (about its diagnostics, not the population values this advice uses): "${w}"` });
    else out.push({ severity: 'flag', code: 'fit-warning', message: `the fit reported: "${w}"` });
  }
  const tr = isRecord(fit.trajectory) ? fit.trajectory : undefined;
  if (tr && tr.searchSettled === false)
    out.push({ severity: 'flag', code: 'fit-cap-reached', message: `the fit's search phase hit its iteration cap (${finite(tr.searchEnd) ? `${tr.searchEnd} iterations` : 'cap'}) without settling: the estimates may not have converged; refit with more iterations before relying on this prior` });
  const unc = isRecord(fit.uncertainty) ? fit.uncertainty : undefined;
  const pop = (fit.population as unknown[]).filter(isRecord);
  const noSe = pop.filter((e) => e.fixed !== true && !finite(e.se)).map((e) => `${String(e.kind)} ${String(e.parameter)}${typeof e.covariate === 'string' ? `~${e.covariate}` : ''}`);
  if (!unc) out.push({ severity: 'flag', code: 'fit-no-se', message: 'the fit carries no standard errors (no uncertainty section): how well its population values are determined is unknown; run the post-fit step (plateau fit computes it) before relying on this prior' });
  else if (unc.ok !== true) out.push({ severity: 'flag', code: 'fit-no-se', message: `the fit's standard errors could not be computed (uncertainty.ok is ${JSON.stringify(unc.ok ?? null)}${finite(unc.conditionNumber) ? `, condition number ${Number(unc.conditionNumber.toPrecision(3))}` : ''}): the model may be over-parameterised or not identifiable from its data` });
  else if (noSe.length) out.push({ severity: 'flag', code: 'fit-no-se', message: `the fit has no standard error for ${noSe.join(', ')}: how well those values are determined is unknown` });
  for (const e of pop)
    if (e.kind === 'bsv' && finite(e.estimate) && e.estimate < COLLAPSED_BSV)
      out.push({ severity: 'flag', code: 'fit-bsv-collapsed', message: `the fit's BSV of ${String(e.parameter)} collapsed to ${Number(e.estimate.toPrecision(2))} (< ${COLLAPSED_BSV} on the transformed scale): the prior holds ${String(e.parameter)} at its typical value, so this patient's levels can barely move it; the fit probably did not converge, or its data do not inform that BSV` });
  return out;
}
