/**
 * The model spec: Plateau's JSON description of a population PK model (structure, parameters
 * with transforms and between-subject variability, covariate relations, residual error and
 * estimator settings). One parser for the CLI, the worker and the UI; it reports every problem
 * with its JSON path.
 */
import { unknownKeyProblems } from '../json/knownKeys.js';
import type { PkParameterName, SolverSettings, StructureId, Transform } from '../models/types.js';
import { jsonFileKind, wrongKindMessage } from './fileKind.js';
import { parseLiterature, type LiteratureInfo } from './literature.js';

export type CovariateRelation = 'power' | 'linear' | 'categorical';
export type ResidualModelId = 'additive' | 'proportional' | 'combined' | 'log-additive';

export interface ParameterSpec {
  /** Typical value on the natural scale (initial value for a fit, the estimate for dosing). */
  typical: number;
  transform: Transform;
  /** SD of the random effect on the transformed scale; null = no between-subject variability. */
  bsv: number | null;
  /** Typical value held fixed (not estimated). */
  fixed: boolean;
}

export interface CovariateEffectSpec {
  parameter: PkParameterName;
  covariate: string;
  relation: CovariateRelation;
  /**
   * Continuous: reference value (power: log(c / reference); linear: c - reference).
   * Categorical: the reference level (no shift).
   */
  reference: number | string;
  /** Continuous relations: the coefficient on the transformed scale (initial value or fixed). */
  coefficient?: number;
  /** Categorical: shift per non-reference level, on the transformed scale. */
  coefficients?: Record<string, number>;
  fixed: boolean;
}

export interface ResidualSpec {
  model: ResidualModelId;
  /** Additive SD (mg/L); for log-additive, the SD on the log scale. */
  a?: number;
  /** Proportional coefficient (fraction of the prediction). */
  b?: number;
}

export interface ModelSpec {
  /** Free-text name of the model. */
  name?: string;
  /** Where the model comes from (free text: a site fit, a publication). */
  source?: string;
  structure: StructureId;
  /** In the order given in the file. */
  parameters: Partial<Record<PkParameterName, ParameterSpec>>;
  covariates: CovariateEffectSpec[];
  /** Each entry is a block of parameters whose random effects are correlated. */
  correlations: PkParameterName[][];
  /** Initial or known correlation values, keyed "CL,V" (optional). */
  correlationValues?: Record<string, number>;
  residual: ResidualSpec;
  /** Estimator settings, validated by the estimator (engine/saem/settings.ts). */
  estimation: Record<string, unknown>;
  /** Covariate ranges the model was built on: name -> [min, max]. */
  covariateRanges?: Record<string, [number, number]>;
  /** ODE solver settings for the numerically solved models (1cmt-mm); defaults in engine/models/types.ts. */
  solver?: Partial<SolverSettings>;
  /** A published model: its citation, population, where its values come from, and who verified them. */
  literature?: LiteratureInfo;
}

/** Every key a spec may have, at each level (unknown keys are errors: a misspelt "bvs" is never ignored). */
export const SPEC_KEYS = ['name', 'source', 'structure', 'parameters', 'covariates', 'correlations', 'correlationValues', 'residual', 'estimation', 'covariateRanges', 'solver', 'literature'] as const;
export const PARAMETER_KEYS = ['typical', 'transform', 'bsv', 'fixed'] as const;
export const COVARIATE_EFFECT_KEYS = ['parameter', 'covariate', 'relation', 'reference', 'coefficient', 'coefficients', 'fixed'] as const;
export const RESIDUAL_KEYS = ['model', 'a', 'b'] as const;
export const SOLVER_KEYS = ['relTol', 'absTol', 'maxSteps'] as const;

/**
 * Plausible ranges of spec values (common practice, deliberately wide): a value outside them is a
 * typing or unit error, and a value such as 1e-320 would turn every prediction into NaN or
 * Infinity. Typical values of rates, clearances and volumes in their units (L/h, L, 1/h, mg/h, mg/L).
 */
export const PLAUSIBLE = {
  typical: [1e-6, 1e6],
  tlagMaxH: 48,
  bsvMax: 3,
  coefficientAbsMax: 10,
  residualAMax: 1e4,
  residualBMax: 10,
} as const;

/** A problem text when a natural-scale typical value is outside the plausible range, else undefined. */
export function implausibleTypical(name: string, value: number): string | undefined {
  if (!Number.isFinite(value)) return `${value} is not a finite number`;
  if (name === 'F') return value > 0 && value <= 1 ? undefined : `${value} is outside (0, 1]`;
  if (name === 'tlag') return value >= 0 && value <= PLAUSIBLE.tlagMaxH ? undefined : `${value} h is outside the plausible range 0-${PLAUSIBLE.tlagMaxH} h`;
  const [lo, hi] = PLAUSIBLE.typical;
  return value >= lo && value <= hi ? undefined : `${value} is outside the plausible range ${lo}-${hi} (check the value and its unit)`;
}

export class SpecError extends Error {
  readonly problems: readonly string[];
  constructor(problems: readonly string[]) {
    super(`invalid model spec:\n${problems.map((p) => `  ${p}`).join('\n')}`);
    this.name = 'SpecError';
    this.problems = problems;
  }
}

export const STRUCTURE_PARAMETERS: Record<StructureId, readonly PkParameterName[]> = {
  '1cmt': ['CL', 'V'],
  '2cmt': ['CL', 'V1', 'Q', 'V2'],
  '3cmt': ['CL', 'V1', 'Q2', 'V2', 'Q3', 'V3'],
  '1cmt-mm': ['Vmax', 'Km', 'V'],
};
export const ABSORPTION_PARAMETERS: readonly PkParameterName[] = ['ka', 'tlag', 'F'];

const TRANSFORMS: readonly Transform[] = ['log', 'logit', 'none'];
const RELATIONS: readonly CovariateRelation[] = ['power', 'linear', 'categorical'];
const RESIDUALS: readonly ResidualModelId[] = ['additive', 'proportional', 'combined', 'log-additive'];

function isRecord(x: unknown): x is Record<string, unknown> {
  return typeof x === 'object' && x !== null && !Array.isArray(x);
}
const finite = (x: unknown): x is number => typeof x === 'number' && Number.isFinite(x);

/**
 * A null where null is not a documented value (only `bsv: null`, "no between-subject
 * variability") would otherwise be read as "use the default": refused, so no input is silently
 * reinterpreted. Leave the key out for the default.
 */
function nullProblems(raw: Record<string, unknown>, at: string, nullable: readonly string[]): string[] {
  return Object.keys(raw)
    .filter((k) => raw[k] === null && !nullable.includes(k))
    .map((k) => `${at}.${k}: null is not a value here; leave the key out for the default`);
}

/** Parse and validate a model spec from already-parsed JSON. Throws SpecError listing every problem. */
export function parseModelSpec(json: unknown): ModelSpec {
  const problems: string[] = [];
  if (!isRecord(json)) throw new SpecError(['the spec must be a JSON object']);

  const kind = json.structure === undefined ? wrongKindMessage(json, ['model spec']) : undefined;
  if (kind) throw new SpecError([`${kind}${jsonFileKind(json) === 'fit.json' ? ' (its "spec" entry holds the spec it was fitted with)' : ''}`]);
  problems.push(...unknownKeyProblems(json, SPEC_KEYS));
  const structure = json.structure as StructureId;
  if (!(typeof structure === 'string' && Object.prototype.hasOwnProperty.call(STRUCTURE_PARAMETERS, structure))) {
    const shown = typeof json.structure === 'string' ? JSON.stringify(json.structure) : json.structure === undefined ? 'missing' : `${JSON.stringify(json.structure)} (not text)`;
    throw new SpecError([...problems, `structure: ${json.structure === undefined ? 'missing' : `unknown model id ${shown}`}; give one of ${Object.keys(STRUCTURE_PARAMETERS).join(', ')}`]);
  }
  const allowed = [...STRUCTURE_PARAMETERS[structure], ...ABSORPTION_PARAMETERS];

  const parameters: Partial<Record<PkParameterName, ParameterSpec>> = Object.create(null);
  if (!isRecord(json.parameters)) problems.push('parameters: must be an object of name -> {typical, transform, bsv, fixed}');
  else {
    for (const [name, raw] of Object.entries(json.parameters)) {
      const at = `parameters.${name}`;
      if (!allowed.includes(name as PkParameterName)) {
        problems.push(`${at}: not a parameter of ${structure} (allowed: ${allowed.join(', ')})`);
        continue;
      }
      if (!isRecord(raw)) {
        problems.push(`${at}: must be an object {typical, transform, bsv, fixed}`);
        continue;
      }
      problems.push(...unknownKeyProblems(raw, PARAMETER_KEYS, at));
      problems.push(...nullProblems(raw, at, ['bsv']));
      const transform = (raw.transform ?? (name === 'F' ? 'logit' : 'log')) as Transform;
      if (!TRANSFORMS.includes(transform)) problems.push(`${at}.transform: must be log, logit or none`);
      const typical = raw.typical;
      if (!finite(typical)) problems.push(`${at}.typical: must be a finite number`);
      else if (transform === 'log' && typical <= 0) problems.push(`${at}.typical: must be > 0 for a log transform`);
      else if (transform === 'logit' && !(typical > 0 && typical < 1)) problems.push(`${at}.typical: must lie in (0, 1) for a logit transform`);
      else if (name !== 'tlag' && typical <= 0 && transform === 'none') problems.push(`${at}.typical: must be > 0`);
      else if (name === 'tlag' && typical < 0) problems.push(`${at}.typical: must be >= 0`);
      else {
        const why = implausibleTypical(name, typical);
        if (why) problems.push(`${at}.typical: ${why}`);
      }
      const bsv = raw.bsv ?? null;
      if (bsv !== null && !(finite(bsv) && bsv > 0)) problems.push(`${at}.bsv: must be a number > 0 or null`);
      else if (bsv !== null && (bsv as number) > PLAUSIBLE.bsvMax) problems.push(`${at}.bsv: ${bsv} is implausible (the SD of the random effect on the transformed scale, at most ${PLAUSIBLE.bsvMax})`);
      const fixed = raw.fixed ?? false;
      if (typeof fixed !== 'boolean') problems.push(`${at}.fixed: must be true or false`);
      parameters[name as PkParameterName] = { typical: typical as number, transform, bsv: bsv as number | null, fixed: fixed as boolean };
    }
    for (const required of STRUCTURE_PARAMETERS[structure]) {
      if (!(required in parameters)) problems.push(`parameters.${required}: missing (required by ${structure})`);
    }
  }

  const covariates: CovariateEffectSpec[] = [];
  const rawCov = json.covariates ?? [];
  if (!Array.isArray(rawCov)) problems.push('covariates: must be an array');
  else
    rawCov.forEach((c, i) => {
      const at = `covariates[${i}]`;
      if (!isRecord(c)) return problems.push(`${at}: must be an object`);
      problems.push(...unknownKeyProblems(c, COVARIATE_EFFECT_KEYS, at));
      problems.push(...nullProblems(c, at, []));
      const parameter = c.parameter as PkParameterName;
      if (!(typeof parameter === 'string' && parameter in parameters)) problems.push(`${at}.parameter: ${JSON.stringify(c.parameter)} is not a parameter of this model`);
      if (!(typeof c.covariate === 'string' && c.covariate.length > 0)) problems.push(`${at}.covariate: must name a covariate column`);
      const relation = c.relation as CovariateRelation;
      if (!RELATIONS.includes(relation)) problems.push(`${at}.relation: must be power, linear or categorical`);
      const fixed = c.fixed ?? false;
      if (typeof fixed !== 'boolean') problems.push(`${at}.fixed: must be true or false`);
      if (relation === 'categorical') {
        if (!(typeof c.reference === 'string' || finite(c.reference))) problems.push(`${at}.reference: the reference level is required`);
        const coefs = c.coefficients ?? {};
        if (!isRecord(coefs) || !Object.values(coefs).every(finite)) problems.push(`${at}.coefficients: must map level -> number`);
        else if (!Object.values(coefs).every((v) => Math.abs(v as number) <= PLAUSIBLE.coefficientAbsMax)) problems.push(`${at}.coefficients: a shift beyond +-${PLAUSIBLE.coefficientAbsMax} on the transformed scale is implausible`);
        const coefficients: Record<string, number> = Object.create(null);
        if (isRecord(coefs)) for (const [k, v] of Object.entries(coefs)) coefficients[k] = v as number;
        covariates.push({ parameter, covariate: c.covariate as string, relation, reference: String(c.reference), coefficients, fixed: fixed as boolean });
      } else {
        if (!finite(c.reference)) problems.push(`${at}.reference: must be a number`);
        else if (relation === 'power' && c.reference <= 0) problems.push(`${at}.reference: must be > 0 for a power relation`);
        const coefficient = c.coefficient ?? 0;
        if (!finite(coefficient)) problems.push(`${at}.coefficient: must be a number`);
        else if (Math.abs(coefficient) > PLAUSIBLE.coefficientAbsMax) problems.push(`${at}.coefficient: ${coefficient} is implausible (at most +-${PLAUSIBLE.coefficientAbsMax} on the transformed scale)`);
        covariates.push({ parameter, covariate: c.covariate as string, relation, reference: c.reference as number, coefficient: coefficient as number, fixed: fixed as boolean });
      }
    });

  const correlations: PkParameterName[][] = [];
  const rawCorr = json.correlations ?? [];
  if (!Array.isArray(rawCorr)) problems.push('correlations: must be an array of parameter-name lists');
  else
    rawCorr.forEach((block, i) => {
      if (!Array.isArray(block) || block.length < 2) return problems.push(`correlations[${i}]: must list at least two parameters`);
      for (const p of block) {
        const ps = parameters[p as PkParameterName];
        if (!ps) problems.push(`correlations[${i}]: ${JSON.stringify(p)} is not a parameter of this model`);
        else if (ps.bsv === null) problems.push(`correlations[${i}]: ${p} has no between-subject variability to correlate`);
      }
      correlations.push(block as PkParameterName[]);
    });

  let correlationValues: Record<string, number> | undefined;
  if (json.correlationValues !== undefined) {
    if (!isRecord(json.correlationValues)) problems.push('correlationValues: must map "P1,P2" -> number in (-1, 1)');
    else {
      correlationValues = Object.create(null) as Record<string, number>;
      for (const [k, v] of Object.entries(json.correlationValues)) {
        if (!(finite(v) && v > -1 && v < 1)) problems.push(`correlationValues.${k}: must be a number in (-1, 1)`);
        else correlationValues[k] = v;
      }
    }
  }

  let residual: ResidualSpec = { model: 'additive', a: 1 };
  if (!isRecord(json.residual)) problems.push('residual: must be an object {model, a, b}');
  else {
    problems.push(...unknownKeyProblems(json.residual, RESIDUAL_KEYS, 'residual'));
    const model = json.residual.model as ResidualModelId;
    if (!RESIDUALS.includes(model)) problems.push('residual.model: must be additive, proportional, combined or log-additive');
    const a = json.residual.a;
    const b = json.residual.b;
    const needA = model === 'additive' || model === 'combined' || model === 'log-additive';
    const needB = model === 'proportional' || model === 'combined';
    if (needA && !(finite(a) && a > 0)) problems.push(`residual.a: must be a number > 0 for ${model} error`);
    if (needB && !(finite(b) && b > 0)) problems.push(`residual.b: must be a number > 0 for ${model} error`);
    if (needA && finite(a) && a > PLAUSIBLE.residualAMax) problems.push(`residual.a: ${a} is implausible (at most ${PLAUSIBLE.residualAMax})`);
    if (needB && finite(b) && b > PLAUSIBLE.residualBMax) problems.push(`residual.b: ${b} is implausible (at most ${PLAUSIBLE.residualBMax})`);
    // A value the error model does not use would be silently ignored: refused unless it is 0 (none).
    if (!needA && a !== undefined && a !== 0) problems.push(`residual.a: not used by ${model} error; remove it`);
    if (!needB && b !== undefined && b !== 0) problems.push(`residual.b: not used by ${model} error; remove it`);
    residual = { model, ...(needA ? { a: a as number } : {}), ...(needB ? { b: b as number } : {}) };
  }

  const estimation = json.estimation ?? {};
  if (!isRecord(estimation)) problems.push('estimation: must be an object');

  let covariateRanges: Record<string, [number, number]> | undefined;
  if (json.covariateRanges !== undefined) {
    if (!isRecord(json.covariateRanges)) problems.push('covariateRanges: must map covariate -> [min, max]');
    else {
      covariateRanges = Object.create(null) as Record<string, [number, number]>;
      for (const [k, v] of Object.entries(json.covariateRanges)) {
        if (!(Array.isArray(v) && v.length === 2 && finite(v[0]) && finite(v[1]) && v[0] <= v[1])) problems.push(`covariateRanges.${k}: must be [min, max]`);
        else covariateRanges[k] = [v[0], v[1]];
      }
    }
  }

  let solver: Partial<SolverSettings> | undefined;
  if (json.solver !== undefined) {
    if (!isRecord(json.solver)) problems.push('solver: must be an object {relTol, absTol, maxSteps}');
    else {
      solver = {};
      problems.push(...unknownKeyProblems(json.solver, SOLVER_KEYS, 'solver'));
      for (const [k, v] of Object.entries(json.solver)) {
        if (k === 'relTol' || k === 'absTol') {
          if (!(finite(v) && v > 0 && v < 1)) problems.push(`solver.${k}: must be a number in (0, 1)`);
          else solver[k] = v;
        } else if (k === 'maxSteps') {
          if (!(finite(v) && Number.isInteger(v) && v >= 100)) problems.push('solver.maxSteps: must be an integer >= 100');
          else solver.maxSteps = v;
        }
      }
    }
  }

  for (const key of ['name', 'source'] as const) {
    if (json[key] !== undefined && typeof json[key] !== 'string') problems.push(`${key}: must be text`);
  }

  const literature = json.literature === undefined ? undefined : parseLiterature(json.literature, problems);

  if (problems.length) throw new SpecError(problems);
  return {
    ...(typeof json.name === 'string' ? { name: json.name } : {}),
    ...(typeof json.source === 'string' ? { source: json.source } : {}),
    structure,
    parameters,
    covariates,
    correlations,
    ...(correlationValues ? { correlationValues } : {}),
    residual,
    estimation: estimation as Record<string, unknown>,
    ...(covariateRanges ? { covariateRanges } : {}),
    ...(solver ? { solver } : {}),
    ...(literature ? { literature } : {}),
  };
}
