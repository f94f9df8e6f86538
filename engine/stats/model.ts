/**
 * The compiled statistical model (DESIGN.md §4): built once from a ModelSpec and a Dataset,
 * then evaluated in the hot loops of the estimator, the post-fit computations and dosing.
 *
 *   psi_i = h(phi_i),  phi_i = mu + beta . x_i + eta_i,  eta_i ~ N(0, Omega)
 *
 * Stable API (reused by engine/saem, engine/posthoc, engine/dosing):
 * - `compileModel(spec, dataset, options?)` -> CompiledModel, or throws ModelDataError listing
 *   every mismatch between model and data (subject, covariate, parameter, what to do).
 * - Parameters are in spec order (`parameters[j]`), each with its transform, its BSV index
 *   `etaIndex` (-1 without BSV) and `fixed`. Random effects are numbered 0..nEta-1 in that
 *   order; `etaParameter[k]` maps back. `blocks` lists the correlated groups of random effects
 *   (overlapping spec blocks merged; singletons for the rest); Omega is nEta x nEta row-major.
 * - Covariate terms (`covariateTerms[t]`, one regressor each: power log(c/ref), linear c-ref,
 *   one indicator per non-reference categorical level) and per subject `subjects[i].design[t]`.
 * - `initial`: the population parameters from the spec (`PopulationParameters`: mu and beta on
 *   the transformed scale, Omega, residual a and b).
 * - `meanPhi(i, theta, out)`: mu + beta . x_i for subject i (length nParams).
 * - `predict(i, phi, out)`: concentrations at subject i's observation times (false when the
 *   structural model refuses phi). `logLikFromPredictions(i, f, a, b)` and
 *   `subjectLogLik(i, phi, a?, b?)`: log p(y_i | phi_i), censored levels through P(Y < LLOQ),
 *   all constants included; -Infinity for impossible phi. Zero allocation.
 * - `priorFactor(omega)` -> OmegaFactor | null (null when Omega is not positive definite) and
 *   `logPrior(i, phi, theta, factor)`: log N(phi_i; meanPhi_i, Omega) over the BSV components.
 * - `toNatural(phi, out)`: phi -> psi (natural scale, spec order); `toModelVector(phi, out)`:
 *   the structural model's full vector (absent parameters at their defaults).
 * - `warnings`: non-fatal problems found while compiling (all-censored subject, ...).
 * The compiled model holds scratch buffers: it is not re-entrant across threads (one per worker).
 */
import type { Dataset, Dose } from '../data/types.js';
import type { ParameterInfo, PkParameterName, Predictor, StructuralModel, Transform } from '../models/types.js';
import type { CovariateRelation, ModelSpec, ResidualModelId } from '../spec/modelSpec.js';
import { structuralModelWithSolver } from '../models/catalogue.js';
import { choleskyLower, invertFromCholesky } from './dense.js';
import { observationLogLik } from './residual.js';
import { naturalToTransformed, transformedToNatural } from '../spec/individual.js';

export interface CompiledParameter {
  name: PkParameterName;
  transform: Transform;
  /** Index of the random effect, -1 when the parameter has no BSV. */
  etaIndex: number;
  /** Typical value held at its spec value. */
  fixed: boolean;
  /** Position in the structural model's parameter vector. */
  modelIndex: number;
  /** Initial typical value on the natural scale (from the spec). */
  initialTypical: number;
}

export interface CovariateTerm {
  /** Index into `parameters`. */
  parameterIndex: number;
  covariate: string;
  relation: CovariateRelation;
  /** Categorical: the level this indicator stands for. */
  level?: string;
  /** Continuous: the reference value; categorical: the reference level. */
  reference: number | string;
  fixed: boolean;
  /** Initial (or fixed) coefficient on the transformed scale. */
  initial: number;
  /** Label for reports, e.g. "CL~weight_kg" or "V~sex=F". */
  label: string;
}

export interface CompiledSubject {
  id: string;
  nObs: number;
  timesH: Float64Array;
  /** Levels (mg/L); for censored levels the LLOQ. */
  y: Float64Array;
  censored: Uint8Array;
  lloqMgL: Float64Array;
  nCensored: number;
  /** Regressor value per covariate term. */
  design: Float64Array;
  doses: readonly Dose[];
  predictor: Predictor;
}

/** Population parameters. mu and beta on the transformed scale. */
export interface PopulationParameters {
  /** Typical value per parameter, transformed scale (spec order). */
  mu: Float64Array;
  /** Coefficient per covariate term. */
  beta: Float64Array;
  /** nEta x nEta, row-major. */
  omega: Float64Array;
  /** Residual: additive SD (or SD on the log scale for log-additive). */
  a: number;
  /** Residual: proportional coefficient. */
  b: number;
}

/** Cholesky factor and inverse of Omega, for the population prior. */
export interface OmegaFactor {
  n: number;
  /** Lower Cholesky factor, row-major. */
  chol: Float64Array;
  inverse: Float64Array;
  logDet: number;
}

export interface CompiledModel {
  spec: ModelSpec;
  dataset: Dataset;
  /** True when the structural model is the catalogue's (so another thread can compile the same model from spec and dataset). */
  catalogueStructure: boolean;
  structural: StructuralModel;
  nSubjects: number;
  nParams: number;
  nEta: number;
  nObsTotal: number;
  nCensoredTotal: number;
  parameters: readonly CompiledParameter[];
  etaParameter: Int32Array;
  blocks: readonly (readonly number[])[];
  covariateTerms: readonly CovariateTerm[];
  residualModel: ResidualModelId;
  subjects: readonly CompiledSubject[];
  initial: PopulationParameters;
  warnings: readonly string[];
  meanPhi(i: number, theta: PopulationParameters, out: Float64Array): void;
  toNatural(phi: ArrayLike<number>, out: Float64Array): void;
  toModelVector(phi: ArrayLike<number>, out: Float64Array): boolean;
  predict(i: number, phi: ArrayLike<number>, out: Float64Array): boolean;
  logLikFromPredictions(i: number, f: ArrayLike<number>, a: number, b: number): number;
  subjectLogLik(i: number, phi: ArrayLike<number>, a?: number, b?: number): number;
  priorFactor(omega: ArrayLike<number>): OmegaFactor | null;
  logPrior(i: number, phi: ArrayLike<number>, theta: PopulationParameters, factor: OmegaFactor): number;
}

/** One problem found while matching a model to a dataset. */
export interface ModelDataProblem {
  subject?: string;
  parameter?: string;
  covariate?: string;
  message: string;
}

export class ModelDataError extends Error {
  readonly problems: readonly ModelDataProblem[];
  constructor(problems: readonly ModelDataProblem[]) {
    const lines = problems.slice(0, 20).map((p) => {
      const where = [p.subject !== undefined ? `subject ${p.subject}` : '', p.parameter ? `parameter ${p.parameter}` : '', p.covariate ? `covariate ${p.covariate}` : '']
        .filter(Boolean)
        .join(', ');
      return where ? `${where}: ${p.message}` : p.message;
    });
    const more = problems.length > 20 ? `\n... and ${problems.length - 20} more` : '';
    super(`the model does not fit the data:\n${lines.join('\n')}${more}`);
    this.name = 'ModelDataError';
    this.problems = problems;
  }
}

export interface CompileOptions {
  /**
   * Structural model to evaluate (by default the catalogue's model for spec.structure). Any
   * model honouring the Predictor contract works, e.g. a linear model for reference checks.
   */
  structuralModel?: StructuralModel;
  /**
   * Prepare predictions only for the subjects [from, to) (a thread of a fit that steps only
   * those; engine/saem/threads.ts): the others' predict() refuses. Checks and warnings still
   * cover every subject.
   */
  preparedSubjects?: { from: number; to: number };
}

const LOG_2PI = Math.log(2 * Math.PI);

/** Merge blocks that share a member (union-find); every index not in a block is a singleton. */
export function mergeBlocks(n: number, blocks: readonly (readonly number[])[]): number[][] {
  const parent = Array.from({ length: n }, (_, i) => i);
  const find = (x: number): number => (parent[x] === x ? x : (parent[x] = find(parent[x])));
  for (const b of blocks) for (let k = 1; k < b.length; k++) parent[find(b[k])] = find(b[0]);
  const groups = new Map<number, number[]>();
  for (let i = 0; i < n; i++) {
    const r = find(i);
    const g = groups.get(r);
    if (g) g.push(i);
    else groups.set(r, [i]);
  }
  return [...groups.values()].sort((x, y) => x[0] - y[0]);
}

export function compileModel(spec: ModelSpec, dataset: Dataset, options: CompileOptions = {}): CompiledModel {
  const problems: ModelDataProblem[] = [];
  const warnings: string[] = [];
  const preDoseLevels: string[] = [];
  const structural = options.structuralModel ?? structuralModelWithSolver(spec.structure, spec.solver);
  const info = new Map<string, ParameterInfo>();
  for (const p of structural.parameters) info.set(p.name, p);

  // Parameters in spec order.
  const parameters: CompiledParameter[] = [];
  let nEta = 0;
  for (const [name, ps] of Object.entries(spec.parameters)) {
    if (!ps) continue;
    const modelIndex = structural.parameterOrder.indexOf(name as PkParameterName);
    if (modelIndex < 0) {
      problems.push({ parameter: name, message: `not a parameter of structure ${structural.id} (${structural.parameterOrder.join(', ')})` });
      continue;
    }
    const pi = info.get(name);
    if (pi && !pi.transforms.includes(ps.transform))
      problems.push({ parameter: name, message: `transform "${ps.transform}" does not respect the domain of ${name}; use ${pi.transforms.join(' or ')}` });
    const phi0 = naturalToTransformed(ps.transform, ps.typical);
    if (!Number.isFinite(phi0)) problems.push({ parameter: name, message: `typical value ${ps.typical} is outside the domain of the ${ps.transform} transform` });
    if (ps.bsv !== null && !(Number.isFinite(ps.bsv) && ps.bsv > 0)) problems.push({ parameter: name, message: `initial BSV must be an SD > 0, got ${ps.bsv}` });
    parameters.push({
      name: name as PkParameterName,
      transform: ps.transform,
      etaIndex: ps.bsv !== null ? nEta++ : -1,
      fixed: ps.fixed,
      modelIndex,
      initialTypical: ps.typical,
    });
  }
  const nParams = parameters.length;
  const paramIndex = new Map<string, number>();
  parameters.forEach((p, j) => paramIndex.set(p.name, j));
  const etaParameter = new Int32Array(nEta);
  for (let j = 0; j < nParams; j++) if (parameters[j].etaIndex >= 0) etaParameter[parameters[j].etaIndex] = j;

  // Defaults for structural parameters absent from the spec.
  const modelDefaults = new Float64Array(structural.parameterOrder.length);
  const hasOral = dataset.subjects.some((s) => s.doses.some((d) => d.route === 'oral'));
  structural.parameterOrder.forEach((name, k) => {
    const pi = info.get(name);
    if (paramIndex.has(name)) return;
    if (pi?.defaultWhenAbsent !== undefined) modelDefaults[k] = pi.defaultWhenAbsent;
    else if (name === 'ka') modelDefaults[k] = pi?.defaultInitial ?? 1;
    else problems.push({ parameter: name, message: `required by structure ${structural.id} but missing from the spec` });
  });
  const analyticPk = structural.parameterOrder.includes('ka' as PkParameterName);
  if (analyticPk) {
    if (hasOral && !paramIndex.has('ka')) {
      const oralSubjects = dataset.subjects.filter((s) => s.doses.some((d) => d.route === 'oral')).map((s) => s.id);
      problems.push({
        parameter: 'ka',
        message: `the data hold oral doses (subjects ${oralSubjects.slice(0, 5).join(', ')}${oralSubjects.length > 5 ? ', ...' : ''}) but the spec has no absorption rate ka; add ka to the parameters`,
      });
    }
    if (!hasOral) {
      for (const name of ['ka', 'tlag', 'F'] as const) {
        const j = paramIndex.get(name);
        if (j !== undefined && !(parameters[j].fixed && parameters[j].etaIndex < 0))
          problems.push({ parameter: name, message: `the data hold no oral dose, so the absorption parameter ${name} cannot be estimated; remove it (IV data) or check the dose routes` });
      }
    }
  }

  // Covariate terms.
  const terms: CovariateTerm[] = [];
  for (const c of spec.covariates) {
    const j = paramIndex.get(c.parameter);
    if (j === undefined) {
      problems.push({ parameter: c.parameter, covariate: c.covariate, message: 'covariate effect on a parameter the model does not have' });
      continue;
    }
    const missing = dataset.subjects.filter((s) => !(c.covariate in s.covariates)).map((s) => s.id);
    if (missing.length) {
      problems.push({
        subject: missing.slice(0, 5).join(', ') + (missing.length > 5 ? ` and ${missing.length - 5} more` : ''),
        covariate: c.covariate,
        message: `no value for covariate ${c.covariate} used on ${c.parameter}; add the column for every subject or remove the effect`,
      });
      continue;
    }
    if (c.relation === 'categorical') {
      const ref = String(c.reference);
      const levels = new Set<string>();
      for (const s of dataset.subjects) levels.add(String(s.covariates[c.covariate]));
      const given = c.coefficients ?? {};
      for (const lv of Object.keys(given)) if (lv !== ref) levels.add(lv);
      levels.delete(ref);
      for (const lv of [...levels].sort()) {
        const present = dataset.subjects.some((s) => String(s.covariates[c.covariate]) === lv);
        const init = Object.prototype.hasOwnProperty.call(given, lv) ? given[lv] : undefined;
        if (c.fixed && init === undefined) {
          problems.push({ parameter: c.parameter, covariate: c.covariate, message: `level "${lv}" has no fixed coefficient; give coefficients.${lv} or unfix the effect` });
          continue;
        }
        if (!present && !c.fixed) continue; // nothing to estimate it from; the level plays no role in this dataset
        terms.push({ parameterIndex: j, covariate: c.covariate, relation: 'categorical', level: lv, reference: ref, fixed: c.fixed, initial: init ?? 0, label: `${c.parameter}~${c.covariate}=${lv}` });
      }
    } else {
      const ref = c.reference as number;
      let bad = false;
      for (const s of dataset.subjects) {
        const v = s.covariates[c.covariate];
        if (typeof v !== 'number' || (c.relation === 'power' && !(v > 0))) {
          problems.push({ subject: s.id, covariate: c.covariate, message: `value ${JSON.stringify(v)} cannot enter a ${c.relation} relation (${c.relation === 'power' ? 'a number > 0' : 'a number'} is needed)` });
          bad = true;
        }
      }
      if (!bad) terms.push({ parameterIndex: j, covariate: c.covariate, relation: c.relation, reference: ref, fixed: c.fixed, initial: c.coefficient ?? 0, label: `${c.parameter}~${c.covariate}` });
    }
  }
  const nTerms = terms.length;

  // Correlated blocks in eta indices.
  const rawBlocks: number[][] = [];
  for (const block of spec.correlations) {
    const idx: number[] = [];
    for (const name of block) {
      const j = paramIndex.get(name);
      if (j === undefined || parameters[j].etaIndex < 0) problems.push({ parameter: name, message: 'a correlation block names a parameter without BSV' });
      else idx.push(parameters[j].etaIndex);
    }
    if (idx.length >= 2) rawBlocks.push(idx);
  }
  const blocks = mergeBlocks(nEta, rawBlocks);
  const blockOf = new Int32Array(nEta);
  blocks.forEach((b, bi) => b.forEach((k) => (blockOf[k] = bi)));

  // Initial Omega from the BSV SDs and the correlation values.
  const omega0 = new Float64Array(nEta * nEta);
  for (const p of parameters) if (p.etaIndex >= 0) {
    const sd = spec.parameters[p.name]!.bsv as number;
    omega0[p.etaIndex * nEta + p.etaIndex] = sd * sd;
  }
  if (spec.correlationValues) {
    for (const [key, r] of Object.entries(spec.correlationValues)) {
      const [n1, n2] = key.split(',').map((s) => s.trim());
      const j1 = paramIndex.get(n1);
      const j2 = paramIndex.get(n2);
      if (j1 === undefined || j2 === undefined || parameters[j1].etaIndex < 0 || parameters[j2].etaIndex < 0) {
        problems.push({ message: `correlationValues."${key}": both parameters need BSV` });
        continue;
      }
      const e1 = parameters[j1].etaIndex;
      const e2 = parameters[j2].etaIndex;
      if (blockOf[e1] !== blockOf[e2]) {
        problems.push({ message: `correlationValues."${key}": ${n1} and ${n2} are not in one correlation block; add [${n1}, ${n2}] to correlations` });
        continue;
      }
      const c = r * Math.sqrt(omega0[e1 * nEta + e1] * omega0[e2 * nEta + e2]);
      omega0[e1 * nEta + e2] = c;
      omega0[e2 * nEta + e1] = c;
    }
  }
  if (nEta > 0 && !choleskyLower(omega0, nEta, new Float64Array(nEta * nEta)))
    problems.push({ message: 'the initial Omega (BSV SDs and correlation values) is not positive definite; lower the correlation values' });

  // Residual.
  const residualModel = spec.residual.model;
  const a0 = spec.residual.a ?? 0;
  const b0 = spec.residual.b ?? 0;
  if ((residualModel === 'additive' || residualModel === 'combined' || residualModel === 'log-additive') && !(a0 > 0)) problems.push({ message: `residual.a must be > 0 for ${residualModel} error` });
  if ((residualModel === 'proportional' || residualModel === 'combined') && !(b0 > 0)) problems.push({ message: `residual.b must be > 0 for ${residualModel} error` });

  // Subjects.
  if (dataset.subjects.length === 1 && nEta > 0)
    problems.push({ subject: dataset.subjects[0].id, message: 'the dataset has one subject: between-subject variability cannot be estimated; set bsv to null for every parameter or add subjects' });
  let nObsTotal = 0;
  let nCensoredTotal = 0;
  const subjects: CompiledSubject[] = [];
  for (const s of dataset.subjects) {
    const n = s.observations.length;
    const timesH = new Float64Array(n);
    const y = new Float64Array(n);
    const censored = new Uint8Array(n);
    const lloq = new Float64Array(n);
    let nc = 0;
    s.observations.forEach((o, k) => {
      timesH[k] = o.timeH;
      y[k] = o.valueMgL;
      censored[k] = o.censored ? 1 : 0;
      lloq[k] = o.lloqMgL ?? (o.censored ? o.valueMgL : 0);
      if (o.censored) nc++;
      if (residualModel === 'log-additive' && !o.censored && !(o.valueMgL > 0))
        problems.push({ subject: s.id, message: `level ${o.valueMgL} mg/L at ${o.timeH} h${o.sourceRow !== undefined ? ` (row ${o.sourceRow})` : ''} is not > 0, which log-additive error cannot describe; mark it censored below the LLOQ or use another error model` });
    });
    // Before (or at) the first dose every PK model predicts 0: a level there is a baseline the
    // model cannot explain, and proportional error gives it zero likelihood.
    if (!options.structuralModel && n > 0) {
      const firstDose = s.doses[0];
      if (!firstDose) problems.push({ subject: s.id, message: 'has levels but no dose rows: the model predicts 0 without a dose; add the doses or remove the subject' });
      else if (firstDose.steadyStateIntervalH === undefined) {
        const early = s.observations.filter((o) => !o.censored && o.valueMgL > 0 && o.timeH <= firstDose.timeH);
        const at = (o: (typeof early)[number]) => `${o.valueMgL} mg/L at ${o.timeH} h${o.sourceRow !== undefined ? ` (row ${o.sourceRow})` : ''}`;
        if (early.length && residualModel === 'proportional')
          problems.push({ subject: s.id, message: `level ${at(early[0])} lies at or before the first dose, where the model predicts 0; proportional error cannot describe a level above 0 at a zero prediction: use combined or additive error, mark the level censored, or remove it` });
        else if (early.length) preDoseLevels.push(`subject ${s.id}: ${at(early[0])}${early.length > 1 ? ` and ${early.length - 1} more` : ''}`);
      }
    }
    if (n === 0) warnings.push(`subject ${s.id} has no levels: it contributes nothing to the fit`);
    else if (nc === n) warnings.push(`subject ${s.id}: every level is below the LLOQ; it informs the fit only through the censored likelihood`);
    const design = new Float64Array(nTerms);
    terms.forEach((t, ti) => {
      const v = s.covariates[t.covariate];
      if (v === undefined) return;
      if (t.relation === 'power') design[ti] = Math.log((v as number) / (t.reference as number));
      else if (t.relation === 'linear') design[ti] = (v as number) - (t.reference as number);
      else design[ti] = String(v) === t.level ? 1 : 0;
    });
    let predictor: Predictor = () => false;
    const prepared = !options.preparedSubjects || (subjects.length >= options.preparedSubjects.from && subjects.length < options.preparedSubjects.to);
    if (!problems.length && prepared) {
      try {
        predictor = structural.prepare(s.doses, timesH);
      } catch (e) {
        problems.push({ subject: s.id, message: `cannot prepare predictions: ${(e as Error).message}` });
      }
    }
    nObsTotal += n;
    nCensoredTotal += nc;
    subjects.push({ id: s.id, nObs: n, timesH, y, censored, lloqMgL: lloq, nCensored: nc, design, doses: s.doses, predictor });
  }
  if (preDoseLevels.length)
    warnings.push(
      `${preDoseLevels.length} subject(s) have levels above 0 at or before their first dose, where the model predicts 0 (baseline or pre-dose samples; they enter the fit as residual error): ${preDoseLevels.slice(0, 3).join('; ')}${preDoseLevels.length > 3 ? '; ...' : ''}`,
    );
  if (nObsTotal === 0) problems.push({ message: 'the dataset holds no levels to fit' });
  else if (nCensoredTotal === nObsTotal) problems.push({ message: 'every level in the dataset is below the LLOQ: nothing to fit' });
  // A continuous covariate constant across subjects makes its coefficient unidentifiable.
  terms.forEach((t, ti) => {
    if (t.fixed || subjects.length === 0) return;
    const v0 = subjects[0].design[ti];
    if (subjects.every((s) => s.design[ti] === v0))
      problems.push({ parameter: parameters[t.parameterIndex].name, covariate: t.covariate, message: `${t.label}: the regressor takes one value for every subject, so its coefficient cannot be estimated; fix it or remove the effect` });
  });
  if (dataset.subjects.length === 1 && nEta === 0) warnings.push('the dataset has one subject: the fit is a single-subject (pooled) fit');

  if (problems.length) throw new ModelDataError(problems);

  const initial: PopulationParameters = {
    mu: Float64Array.from(parameters, (p) => naturalToTransformed(p.transform, p.initialTypical)),
    beta: Float64Array.from(terms, (t) => t.initial),
    omega: omega0,
    a: a0,
    b: b0,
  };

  // Scratch buffers (one compiled model per thread).
  const modelVec = new Float64Array(structural.parameterOrder.length);
  let maxObs = 0;
  for (const s of subjects) maxObs = Math.max(maxObs, s.nObs);
  const fScratch = new Float64Array(maxObs);
  const fViews = subjects.map((s) => fScratch.subarray(0, s.nObs));
  const etaScratch = new Float64Array(nEta);
  const modelIdx = Int32Array.from(parameters, (p) => p.modelIndex);
  const transformCode = Int32Array.from(parameters, (p) => (p.transform === 'log' ? 0 : p.transform === 'logit' ? 1 : 2));
  const termParam = Int32Array.from(terms, (t) => t.parameterIndex);

  function toModelVector(phi: ArrayLike<number>, out: Float64Array): boolean {
    out.set(modelDefaults);
    for (let j = 0; j < nParams; j++) {
      const x = phi[j];
      const code = transformCode[j];
      const v = code === 0 ? Math.exp(x) : code === 1 ? 1 / (1 + Math.exp(-x)) : x;
      if (!Number.isFinite(v)) return false;
      out[modelIdx[j]] = v;
    }
    return true;
  }

  // The scratch vector keeps the defaults of absent parameters; predict writes only the others.
  // Consecutive calls mostly repeat a parameter's value (fixed parameters, the components a
  // component-wise step leaves alone): its back-transform is kept with the value it came from.
  modelVec.set(modelDefaults);
  const lastPhi = new Float64Array(nParams).fill(NaN);
  function predict(i: number, phi: ArrayLike<number>, out: Float64Array): boolean {
    for (let j = 0; j < nParams; j++) {
      const x = phi[j];
      const code = transformCode[j];
      if (x === lastPhi[j] && code !== 2) continue; // (untransformed values are copied: -0 stays -0)
      const v = code === 0 ? Math.exp(x) : code === 1 ? 1 / (1 + Math.exp(-x)) : x;
      if (!Number.isFinite(v)) {
        lastPhi[j] = NaN;
        return false;
      }
      lastPhi[j] = x;
      modelVec[modelIdx[j]] = v;
    }
    return subjects[i].predictor(modelVec, out);
  }

  const LOG_SQRT_2PI = 0.5 * LOG_2PI;
  const residualCode = residualModel === 'additive' ? 0 : residualModel === 'proportional' ? 1 : residualModel === 'combined' ? 2 : 3;
  const logY = subjects.map((s) => Float64Array.from(s.y, (v) => (v > 0 ? Math.log(v) : NaN)));
  function logLikFromPredictions(i: number, f: ArrayLike<number>, a: number, b: number): number {
    const s = subjects[i];
    const n = s.nObs;
    const y = s.y;
    let ll = 0;
    if (s.nCensored === 0 && residualCode === 0) {
      // Additive error without censoring: one log for the whole subject.
      if (!(a > 0)) return -Infinity;
      let q = 0;
      for (let k = 0; k < n; k++) {
        const e = y[k] - f[k];
        q += e * e;
      }
      ll = -0.5 * q / (a * a) - n * (Math.log(a) + LOG_SQRT_2PI);
    } else if (s.nCensored === 0 && residualCode === 3) {
      if (!(a > 0)) return -Infinity;
      const ly = logY[i];
      let q = 0;
      let sumLogY = 0;
      for (let k = 0; k < n; k++) {
        const fk = f[k];
        if (!(fk > 0)) return -Infinity;
        const e = ly[k] - Math.log(fk);
        q += e * e;
        sumLogY += ly[k];
      }
      ll = -0.5 * q / (a * a) - n * (Math.log(a) + LOG_SQRT_2PI) - sumLogY;
    } else if (s.nCensored === 0 && (residualCode === 1 || residualCode === 2)) {
      const a2 = residualCode === 2 ? a * a : 0;
      const b2 = b * b;
      let sum = 0;
      for (let k = 0; k < n; k++) {
        const fk = f[k];
        const w = a2 + b2 * fk * fk;
        if (!(w > 0)) return -Infinity;
        const e = y[k] - fk;
        sum += (e * e) / w + Math.log(w);
      }
      ll = -0.5 * sum - n * LOG_SQRT_2PI;
    } else {
      for (let k = 0; k < n; k++) ll += observationLogLik(residualModel, a, b, y[k], f[k], s.censored[k] === 1, s.lloqMgL[k]);
    }
    return ll === ll ? ll : -Infinity;
  }

  function subjectLogLik(i: number, phi: ArrayLike<number>, a: number = a0, b: number = b0): number {
    const f = fViews[i];
    if (!predict(i, phi, f)) return -Infinity;
    return logLikFromPredictions(i, f, a, b);
  }

  function meanPhi(i: number, theta: PopulationParameters, out: Float64Array): void {
    for (let j = 0; j < nParams; j++) out[j] = theta.mu[j];
    const x = subjects[i].design;
    for (let t = 0; t < nTerms; t++) out[termParam[t]] += theta.beta[t] * x[t];
  }

  function toNatural(phi: ArrayLike<number>, out: Float64Array): void {
    for (let j = 0; j < nParams; j++) out[j] = transformedToNatural(parameters[j].transform, phi[j]);
  }

  function priorFactor(omega: ArrayLike<number>): OmegaFactor | null {
    const chol = new Float64Array(nEta * nEta);
    if (nEta > 0 && !choleskyLower(Float64Array.from(omega), nEta, chol)) return null;
    let logDet = 0;
    for (let k = 0; k < nEta; k++) logDet += 2 * Math.log(chol[k * nEta + k]);
    const inverse = new Float64Array(nEta * nEta);
    invertFromCholesky(chol, nEta, inverse);
    return { n: nEta, chol, inverse, logDet };
  }

  const meanScratch = new Float64Array(nParams);
  function logPrior(i: number, phi: ArrayLike<number>, theta: PopulationParameters, factor: OmegaFactor): number {
    meanPhi(i, theta, meanScratch);
    for (let k = 0; k < nEta; k++) etaScratch[k] = phi[etaParameter[k]] - meanScratch[etaParameter[k]];
    let q = 0;
    const inv = factor.inverse;
    for (let r = 0; r < nEta; r++) {
      let row = 0;
      for (let c = 0; c < nEta; c++) row += inv[r * nEta + c] * etaScratch[c];
      q += etaScratch[r] * row;
    }
    return -0.5 * (q + factor.logDet + nEta * LOG_2PI);
  }

  return {
    spec,
    dataset,
    catalogueStructure: !options.structuralModel,
    structural,
    nSubjects: subjects.length,
    nParams,
    nEta,
    nObsTotal,
    nCensoredTotal,
    parameters,
    etaParameter,
    blocks,
    covariateTerms: terms,
    residualModel,
    subjects,
    initial,
    warnings,
    meanPhi,
    toNatural,
    toModelVector,
    predict,
    logLikFromPredictions,
    subjectLogLik,
    priorFactor,
    logPrior,
  };
}
