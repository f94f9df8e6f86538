/**
 * Observed-data log-likelihood at the estimate.
 * - Importance sampling: per subject, up to M draws (in chunks, until the Monte Carlo error is
 *   small enough) from a multivariate Student-t (df about 5)
 *   centred on the conditional mean with the conditional covariance as its scale; log p(y_i) =
 *   log mean_m p(y_i, eta_m) / q(eta_m), with its Monte Carlo SE (delta method on the mean
 *   weight) and the effective sample size (sum w)^2 / sum w^2 (Kong 1992, from memory).
 * - Information criteria: AIC = -2LL + 2P; BIC = -2LL + P log N (N subjects); BICc =
 *   -2LL + P_R log N + P_F log n_obs, P_R the typical values and covariate effects of parameters
 *   with BSV and the Omega terms, P_F the rest (Delattre, Lavielle & Poursat 2014, Electron J
 *   Stat 8:456-475, from memory).
 */
import { cholesky } from '../linalg/index.js';
import { createStreams } from '../rng/index.js';
import type { ConditionalResult } from './conditional.js';
import { drawStudentT, logStudentTConstant } from './conditional.js';
import type { SubjectDensity } from './density.js';
import { f64, i32, list, u8, type ModeResult } from './modes.js';
import type { ParameterLayout } from './parameters.js';

export interface ImportanceOptions {
  seed: number;
  /** Largest number of samples per subject. */
  samplesPerSubject: number;
  /**
   * Stop a subject's sampling early (checked every 1000 samples after minSamples) once the
   * Monte Carlo SE of -2LL would be below this value if every subject were as precise:
   * per-subject SE of log p(y_i) below targetMcError / (2 sqrt(N)). 'auto': max(0.1, 0.02
   * sqrt(N)) (a tenth of a point up to 25 subjects, then a per-subject precision of 0.01, e.g.
   * 0.63 for 1000 subjects). null: always samplesPerSubject.
   */
  targetMcError: number | 'auto' | null;
  minSamples: number;
  df: number;
  /** Warn when a subject's effective sample size falls below this share of its samples. */
  minEssFraction: number;
}

export const DEFAULT_IMPORTANCE: Readonly<ImportanceOptions> = Object.freeze({ seed: 1, samplesPerSubject: 10_000, targetMcError: 'auto', minSamples: 1000, df: 5, minEssFraction: 0.05 });

export interface ImportanceResult {
  minus2LL: number;
  /** Monte Carlo SE of minus2LL. */
  mcError: number;
  /** Per subject log p(y_i), its Monte Carlo SE and effective sample size. */
  logLik: Float64Array;
  logLikSe: Float64Array;
  ess: Float64Array;
  /** Samples drawn per subject. */
  samplesUsed: Int32Array;
  samplesPerSubject: number;
  warnings: string[];
}

export function importanceSamplingLikelihood(
  density: SubjectDensity,
  conditional: ConditionalResult,
  modes: ModeResult,
  options: Partial<ImportanceOptions> = {},
): ImportanceResult {
  const o = resolveImportanceOptions(options);
  const out = allocateImportance(density.model, o, false);
  importanceKernel(density, conditional, modes, out, o).run(0, density.model.nSubjects);
  concludeImportance(density.model, out, o);
  return out;
}

/** The options with their defaults, checked. */
export function resolveImportanceOptions(options: Partial<ImportanceOptions>): ImportanceOptions {
  const o = { ...DEFAULT_IMPORTANCE, ...options };
  if (!(Number.isInteger(o.df) && o.df >= 1)) throw new RangeError(`the Student-t proposal needs a whole number of degrees of freedom >= 1, got ${o.df}`);
  return o;
}

/** Per-subject outputs (in SharedArrayBuffers when `shared`, for engine/posthoc/threads.ts); `impossible` flags subjects with no finite sample. */
export function allocateImportance(model: SubjectDensity['model'], o: ImportanceOptions, shared: boolean): ImportanceResult & { impossible: Uint8Array } {
  const N = model.nSubjects;
  return {
    minus2LL: 0,
    mcError: 0,
    logLik: f64(N, shared),
    logLikSe: f64(N, shared),
    ess: f64(N, shared),
    samplesUsed: i32(N, shared),
    samplesPerSubject: o.samplesPerSubject,
    warnings: [],
    impossible: u8(N, shared),
  };
}

/** Importance sampling of subjects [from, to) into `out`: each subject draws from its own stream ('posthoc', 'importance', i). */
export function importanceKernel(
  density: SubjectDensity,
  conditional: ConditionalResult,
  modes: ModeResult,
  out: ImportanceResult & { impossible: Uint8Array },
  o: ImportanceOptions,
): { run(from: number, to: number): void } {
  const model = density.model;
  const N = model.nSubjects;
  const d = density.nEta;
  const M = o.samplesPerSubject;
  const target = o.targetMcError === 'auto' ? Math.max(0.1, 0.02 * Math.sqrt(N)) : o.targetMcError;
  const subjectTarget = target !== null && target > 0 ? target / (2 * Math.sqrt(Math.max(1, N))) : 0;
  const CHUNK = 1000;
  let maxObs = 0;
  for (const s of model.subjects) maxObs = Math.max(maxObs, s.nObs);
  const f = new Float64Array(maxObs);
  const lw = new Float64Array(M);
  const chol = new Float64Array(d * d);
  const z = new Float64Array(d);
  const eta = new Float64Array(d);
  const loc = new Float64Array(d);
  const root = createStreams(o.seed);
  const impossibleFlag = out.impossible;
  return {
    run(from, to) {
      for (let i = from; i < to; i++) {
        const fi = f.subarray(0, model.subjects[i].nObs);
        if (d === 0) {
          out.logLik[i] = density.logLik(i, eta, fi);
          out.ess[i] = M;
          out.samplesUsed[i] = 0;
          continue;
        }
        for (let k = 0; k < d; k++) loc[k] = conditional.mean[i * d + k];
        chol.set(conditional.covariance.subarray(i * d * d, (i + 1) * d * d));
        if (!cholesky(chol, d, chol)) {
          chol.set(modes.laplaceCovariance.subarray(i * d * d, (i + 1) * d * d));
          if (!cholesky(chol, d, chol)) {
            chol.set(density.theta.omega);
            cholesky(chol, d, chol);
          }
        }
        const c = logStudentTConstant(chol, d, o.df);
        const rng = root.stream('posthoc', 'importance', i);
        let max = -Infinity;
        let used = 0;
        let s1 = 0, s2 = 0;
        while (used < M) {
          const end = Math.min(M, used + CHUNK);
          for (let m = used; m < end; m++) {
            const lq = drawStudentT(rng, loc, chol, d, o.df, z, eta) + c;
            const v = density.logJoint(i, eta, fi) - lq;
            lw[m] = v;
            if (v > max) max = v;
          }
          used = end;
          if (max === -Infinity) continue;
          // The weight sums are needed only for the early-stop check and at the end.
          const check = subjectTarget > 0 && used >= o.minSamples && used < M;
          if (!check && used < M) continue;
          s1 = 0;
          s2 = 0;
          for (let m = 0; m < used; m++) {
            const w = Math.exp(lw[m] - max);
            s1 += w;
            s2 += w * w;
          }
          if (check) {
            const mean = s1 / used;
            const se = Math.sqrt(Math.max(0, s2 / used - mean * mean) / Math.max(1, used - 1)) / mean;
            if (se < subjectTarget) break;
          }
        }
        out.samplesUsed[i] = used;
        if (max === -Infinity) {
          out.logLik[i] = -Infinity;
          impossibleFlag[i] = 1;
          continue;
        }
        const mean = s1 / used;
        out.logLik[i] = max + Math.log(mean);
        const varW = Math.max(0, s2 / used - mean * mean) / Math.max(1, used - 1);
        out.logLikSe[i] = Math.sqrt(varW) / mean;
        out.ess[i] = (s1 * s1) / s2;
      }
    },
  };
}

/** -2LL, its Monte Carlo error and the warnings: sums over subjects in subject order. */
export function concludeImportance(model: SubjectDensity['model'], out: ImportanceResult & { impossible?: Uint8Array }, o: ImportanceOptions): void {
  const N = model.nSubjects;
  const degenerate: string[] = [];
  const impossible: string[] = [];
  let var2 = 0;
  if (model.nEta > 0)
    for (let i = 0; i < N; i++) {
      if (out.impossible![i]) {
        impossible.push(model.subjects[i].id);
        continue;
      }
      var2 += out.logLikSe[i] * out.logLikSe[i];
      if (out.ess[i] < o.minEssFraction * out.samplesUsed[i]) degenerate.push(`${model.subjects[i].id} (ESS ${out.ess[i].toFixed(0)})`);
    }
  delete out.impossible;
  let total = 0;
  for (let i = 0; i < N; i++) total += out.logLik[i];
  out.minus2LL = -2 * total;
  out.mcError = 2 * Math.sqrt(var2);
  if (degenerate.length)
    out.warnings.push(
      `importance sampling: the weights degenerate for subject(s) ${list(degenerate)}; their log-likelihood is less precise than its Monte Carlo SE suggests (raise the samples or check the conditional distribution)`,
    );
  if (impossible.length) out.warnings.push(`importance sampling: no sample gave a finite density for subject(s) ${list(impossible)}; -2LL is not available`);
}

export interface InformationCriteria {
  nParameters: number;
  /** Parameters tied to random effects (penalised with log N in BICc). */
  nRandomEffectRelated: number;
  aic: number;
  bic: number;
  bicc: number;
}

export function informationCriteria(density: SubjectDensity, layout: ParameterLayout, minus2LL: number): InformationCriteria {
  const model = density.model;
  let pr = 0, pf = 0;
  for (const q of layout.estimated) {
    const e = layout.entries[q];
    const tied =
      e.kind === 'bsv' || e.kind === 'correlation' ||
      (e.kind === 'typical' && model.parameters[e.index].etaIndex >= 0) ||
      (e.kind === 'covariate' && model.parameters[model.covariateTerms[e.index].parameterIndex].etaIndex >= 0);
    if (tied) pr++;
    else pf++;
  }
  const P = pr + pf;
  const N = model.nSubjects;
  const nObs = model.nObsTotal;
  return { nParameters: P, nRandomEffectRelated: pr, aic: minus2LL + 2 * P, bic: minus2LL + P * Math.log(N), bicc: minus2LL + pr * Math.log(N) + pf * Math.log(nObs) };
}
