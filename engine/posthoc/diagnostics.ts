/**
 * Diagnostics data at the estimate.
 * - PRED: prediction at the population mean (eta = 0, covariates included); IPRED: at the
 *   conditional mode; IWRES = (y - IPRED) / g(IPRED) (log-additive: on the log scale).
 *   epsilon-shrinkage = 1 - SD(IWRES) (Savic & Karlsson 2009).
 * - NPDE by simulation with decorrelation (Brendel et al. 2006, Pharm Res 23:2036-2049; Comets,
 *   Brendel & Mentre 2008; from memory): K datasets simulated from the model; per subject the
 *   observed and simulated vectors are decorrelated with the Cholesky factor of the simulated
 *   covariance, pde = share of simulated decorrelated values below the observed one (kept in
 *   [1/K, 1 - 1/K]), npde = Phi^-1(pde). Levels below the LLOQ: pde drawn uniformly on
 *   [0, P(Y < LLOQ | the subject's earlier levels)] in the decorrelated sequence and the level
 *   imputed at that pde (after Nguyen, Comets & Mentre 2012, J Pharmacokinet Pharmacodyn
 *   39:499-518, from memory, who impute from the marginal distribution before decorrelating).
 * - Random effects at the modes against each covariate (covariateRelations).
 * - VPC: observation times (or times after the last dose) cut into bins of about equal counts; per bin the observed 5th, 50th
 *   and 95th percentiles against the 90 % prediction interval of each percentile over the K
 *   simulated replicates, and the share below the LLOQ; censored values rank below every
 *   quantified one and a percentile that falls among them is reported as null (below the LLOQ).
 *   Prediction-corrected option (Bergstrand et al. 2011, AAPS J 13:143-151): Y x PRED_bin / PRED_ij,
 *   PRED_bin the median PRED of the bin.
 */
import { cholesky } from '../linalg/index.js';
import { createStreams } from '../rng/index.js';
import { normalQuantile } from '../rng/index.js';
import { residualSd } from '../stats/residual.js';
import type { SubjectDensity } from './density.js';
import { quantileSorted, studentTTwoSided } from './distributions.js';
import { f64, i32, list, u8, type ModeResult } from './modes.js';
import { npdeTests, type NpdeTests } from './normality.js';

export interface DiagnosticsOptions {
  seed: number;
  /** Simulated replicates (NPDE and VPC); default from the dataset size. */
  replicates?: number;
  /** Upper bound on the number of VPC bins. */
  vpcBins: number;
  /** Coverage of the prediction intervals of the VPC percentiles. */
  piLevel: number;
  /**
   * VPC time axis: time since the first event, time after the last dose, or 'auto' (time after
   * dose when some subject has more than one dose, common practice for TDM data).
   */
  vpcTime: 'time' | 'timeAfterDose' | 'auto';
}

export const DEFAULT_DIAGNOSTICS: Readonly<DiagnosticsOptions> = Object.freeze({ seed: 1, vpcBins: 8, piLevel: 0.9, vpcTime: 'auto' });

export interface ObservationDiagnostics {
  subject: string;
  timeH: number;
  /** Level (mg/L); for censored levels the LLOQ. */
  dv: number;
  censored: boolean;
  pred: number | null;
  ipred: number | null;
  iwres: number | null;
  npde: number | null;
  /** For censored levels: the imputed level used in the NPDE. */
  imputed?: number;
}

export interface PercentileBand {
  lo: number | null;
  median: number | null;
  hi: number | null;
}

export interface VpcBin {
  timeLowH: number;
  timeHighH: number;
  /** Median observation time in the bin. */
  timeMidH: number;
  n: number;
  observed: { p5: number | null; p50: number | null; p95: number | null };
  simulated: { p5: PercentileBand; p50: PercentileBand; p95: PercentileBand };
  censoredFraction: { observed: number; simulated: PercentileBand };
}

export interface VpcData {
  predictionCorrected: boolean;
  /** Time axis of the bins: 'time' (h since the first event) or 'timeAfterDose' (h since the last dose). */
  timeScale: 'time' | 'timeAfterDose';
  replicates: number;
  piLevel: number;
  bins: VpcBin[];
}

export interface DiagnosticsResult {
  observations: ObservationDiagnostics[];
  epsilonShrinkage: number | null;
  npde: { replicates: number; censoredMethod: string; tests: NpdeTests | null };
  vpc: VpcData;
  pcVpc: VpcData;
  covariateRelations: CovariateRelation[];
  warnings: string[];
}

/** Default replicates: 1000 for small datasets, fewer for large ones (at least 200). */
export function defaultReplicates(nObsTotal: number): number {
  return Math.max(200, Math.min(1000, Math.round(1e6 / Math.max(1, nObsTotal) / 100) * 100));
}

const num = (x: number): number | null => (Number.isFinite(x) ? x : null);

export function computeDiagnostics(density: SubjectDensity, modes: ModeResult, options: Partial<DiagnosticsOptions> = {}): DiagnosticsResult {
  const o = { ...DEFAULT_DIAGNOSTICS, ...options };
  const K = o.replicates ?? defaultReplicates(density.model.nObsTotal);
  const sim = allocateSimulation(density.model, K, o.vpcBins, false);
  simulationKernel(density, modes, sim, o.seed).run(0, density.model.nSubjects);
  const vpc = vpcKernel(density.model, sim, o.vpcBins, o.vpcTime);
  vpc.run(0, K);
  return concludeDiagnostics(density, modes, sim, o, vpc.plans());
}

/** Per-level and per-subject outputs of the simulations and NPDE (SharedArrayBuffers when `shared`, for engine/posthoc/threads.ts). */
export interface SimulationParts {
  replicates: number;
  /** Start of each subject's levels, N + 1. */
  offset: Int32Array;
  pred: Float64Array;
  ipred: Float64Array;
  iwres: Float64Array;
  npde: Float64Array;
  imputed: Float64Array;
  /** Simulations: obs-major per subject, sims[offset*K + k*n + o]. */
  sims: Float64Array;
  /** Per subject: simulated profiles without a valid prediction after 10 draws. */
  failed: Int32Array;
  /** Per subject: 1 when the simulated covariance was singular. */
  singular: Uint8Array;
  /** The VPC's replicate summaries, plain then prediction-corrected (vpcSummaryLength each). */
  vpc: Float64Array;
}

export function allocateSimulation(model: SubjectDensity['model'], K: number, maxBins: number, shared: boolean): SimulationParts {
  const N = model.nSubjects;
  const nObs = model.nObsTotal;
  const offset = new Int32Array(N + 1);
  for (let i = 0; i < N; i++) offset[i + 1] = offset[i] + model.subjects[i].nObs;
  return {
    replicates: K,
    offset,
    pred: f64(nObs, shared),
    ipred: f64(nObs, shared),
    iwres: f64(nObs, shared).fill(NaN),
    npde: f64(nObs, shared).fill(NaN),
    imputed: f64(nObs, shared).fill(NaN),
    sims: f64(nObs * K, shared),
    failed: i32(N, shared),
    singular: u8(N, shared),
    vpc: f64(2 * vpcSummaryLength(maxBins, K), shared),
  };
}

/**
 * PRED, IPRED, IWRES, the simulated replicates and the NPDE of subjects [from, to) into `parts`:
 * each subject draws from its own stream ('posthoc', 'simulate', i).
 */
export function simulationKernel(density: SubjectDensity, modes: ModeResult, parts: SimulationParts, seed: number): { run(from: number, to: number): void } {
  const model = density.model;
  const theta = density.theta;
  const rm = model.residualModel;
  const d = density.nEta;
  const p = model.nParams;
  const K = parts.replicates;
  const { offset, pred, ipred, iwres, npde, imputed, sims, singular } = parts;
  const failedSims = parts.failed;
  const zero = new Float64Array(d);
  const etaDraw = new Float64Array(d);
  const z = new Float64Array(d);
  const phi = new Float64Array(p);
  const chol = new Float64Array(d * d);
  if (d > 0) cholesky(theta.omega, d, chol);
  const root = createStreams(seed);
  let maxObs = 0;
  for (const s of model.subjects) maxObs = Math.max(maxObs, s.nObs);
  const f = new Float64Array(maxObs);
  const cov = new Float64Array(maxObs * maxObs);
  const L = new Float64Array(maxObs * maxObs);
  const meanY = new Float64Array(maxObs);
  const dec = new Float64Array(maxObs);
  const decSims = new Float64Array(maxObs * K);
  const col = new Float64Array(K);
  return {
    run(from, to) {
      for (let i = from; i < to; i++) {
        const s = model.subjects[i];
        const n = s.nObs;
        if (n === 0) continue;
        const fi = f.subarray(0, n);
        const base = offset[i];
        // PRED, IPRED, IWRES.
        density.phiOf(i, zero, phi);
        const okPred = model.predict(i, phi, fi);
        for (let q = 0; q < n; q++) pred[base + q] = okPred ? fi[q] : NaN;
        const okIpred = model.predict(i, modes.phi.subarray(i * p, (i + 1) * p), fi);
        for (let q = 0; q < n; q++) {
          const ip = okIpred ? fi[q] : NaN;
          ipred[base + q] = ip;
          if (s.censored[q] || !Number.isFinite(ip)) continue;
          if (rm === 'log-additive') iwres[base + q] = ip > 0 && s.y[q] > 0 ? (Math.log(s.y[q]) - Math.log(ip)) / theta.a : NaN;
          else iwres[base + q] = (s.y[q] - ip) / residualSd(rm, theta.a, theta.b, ip);
        }
        // Simulate K replicates of the subject.
        const rng = root.stream('posthoc', 'simulate', i);
        const simBase = base * K;
        for (let k = 0; k < K; k++) {
          let ok = false;
          for (let attempt = 0; attempt < 10 && !ok; attempt++) {
            for (let c = 0; c < d; c++) z[c] = rng.normal();
            for (let r = 0; r < d; r++) {
              let v = 0;
              for (let c = 0; c <= r; c++) v += chol[r * d + c] * z[c];
              etaDraw[r] = v;
            }
            density.phiOf(i, etaDraw, phi);
            ok = model.predict(i, phi, fi);
          }
          for (let q = 0; q < n; q++) {
            let y = NaN;
            if (ok) {
              const e = rng.normal();
              y = rm === 'log-additive' ? fi[q] * Math.exp(theta.a * e) : fi[q] + residualSd(rm, theta.a, theta.b, fi[q]) * e;
            }
            sims[simBase + k * n + q] = y;
          }
          if (!ok) failedSims[i]++;
        }
        // NPDE: decorrelate with the simulated mean and covariance.
        let nValid = 0;
        meanY.fill(0);
        for (let k = 0; k < K; k++) {
          if (!(sims[simBase + k * n] === sims[simBase + k * n])) continue;
          nValid++;
          for (let q = 0; q < n; q++) meanY[q] += sims[simBase + k * n + q];
        }
        if (nValid < 2) continue;
        for (let q = 0; q < n; q++) meanY[q] /= nValid;
        cov.fill(0);
        for (let k = 0; k < K; k++) {
          if (!(sims[simBase + k * n] === sims[simBase + k * n])) continue;
          for (let r = 0; r < n; r++) {
            const dr = sims[simBase + k * n + r] - meanY[r];
            for (let c = 0; c <= r; c++) cov[r * n + c] += dr * (sims[simBase + k * n + c] - meanY[c]);
          }
        }
        for (let r = 0; r < n; r++) for (let c = 0; c <= r; c++) cov[r * n + c] = cov[c * n + r] = cov[r * n + c] / (nValid - 1);
        if (!cholesky(cov, n, L)) {
          // A level without variability (e.g. a zero prediction under proportional error):
          // standardise each level by its own SD instead of decorrelating.
          singular[i] = 1;
          L.fill(0);
          for (let q = 0; q < n; q++) L[q * n + q] = Math.sqrt(Math.max(cov[q * n + q], 1e-300));
        }
        let m = 0;
        for (let k = 0; k < K; k++) {
          const off = simBase + k * n;
          if (!(sims[off] === sims[off])) continue;
          for (let r = 0; r < n; r++) {
            let v = sims[off + r] - meanY[r];
            for (let c = 0; c < r; c++) v -= L[r * n + c] * decSims[m * n + c];
            decSims[m * n + r] = v / L[r * n + r];
          }
          m++;
        }
        // The Cholesky factor conditions each level on the earlier ones, so a censored level is
        // imputed in that sequence: pde ~ U(0, P(Y < LLOQ | earlier levels)), then the level that
        // gives it (after Nguyen, Comets & Mentre 2012, who draw from the marginal distribution).
        for (let r = 0; r < n; r++) {
          let shift = meanY[r];
          for (let c = 0; c < r; c++) shift += L[r * n + c] * dec[c];
          for (let k = 0; k < m; k++) col[k] = decSims[k * n + r];
          const sorted = col.subarray(0, m).sort();
          let pde: number;
          if (s.censored[r]) {
            const upper = (s.lloqMgL[r] - shift) / L[r * n + r];
            let below = 0;
            while (below < m && sorted[below] < upper) below++;
            pde = rng.uniform() * (below / m);
            dec[r] = quantileSorted(sorted, m, pde);
            if (dec[r] > upper) dec[r] = upper;
            imputed[base + r] = shift + L[r * n + r] * dec[r];
          } else {
            dec[r] = (s.y[r] - shift) / L[r * n + r];
            let below = 0;
            while (below < m && sorted[below] < dec[r]) below++;
            pde = below / m;
          }
          npde[base + r] = normalQuantile(Math.min(1 - 1 / m, Math.max(1 / m, pde)));
        }
      }
    },
  };
}

/** Everything after the per-subject part, on the calling thread: warnings, shrinkage, records, NPDE tests, VPC, covariate screens. */
export function concludeDiagnostics(density: SubjectDensity, modes: ModeResult, parts: SimulationParts, o: DiagnosticsOptions, vpcPlans: readonly VpcPlan[]): DiagnosticsResult {
  const model = density.model;
  const N = model.nSubjects;
  const K = parts.replicates;
  const nObs = model.nObsTotal;
  const warnings: string[] = [];
  const { offset, pred, ipred, iwres, npde, imputed, sims } = parts;
  let failedSims = 0;
  const singular: string[] = [];
  for (let i = 0; i < N; i++) {
    failedSims += parts.failed[i];
    if (parts.singular[i]) singular.push(model.subjects[i].id);
  }
  if (failedSims) warnings.push(`simulation: ${failedSims} simulated subject profile(s) had no valid prediction after 10 draws and are left out of the NPDE and VPC`);
  if (singular.length) warnings.push(`NPDE: the simulated covariance of subject(s) ${list(singular)} is singular; their levels are standardised without decorrelation`);

  let sIw = 0, sIw2 = 0, nIw = 0;
  for (let q = 0; q < nObs; q++) if (Number.isFinite(iwres[q])) (nIw++, (sIw += iwres[q]), (sIw2 += iwres[q] * iwres[q]));
  const sdIw = nIw > 1 ? Math.sqrt((sIw2 - (sIw * sIw) / nIw) / (nIw - 1)) : NaN;

  const observations: ObservationDiagnostics[] = [];
  for (let i = 0; i < N; i++) {
    const s = model.subjects[i];
    for (let q = 0; q < s.nObs; q++) {
      const g = offset[i] + q;
      const rec: ObservationDiagnostics = { subject: s.id, timeH: s.timesH[q], dv: s.y[q], censored: s.censored[q] === 1, pred: num(pred[g]), ipred: num(ipred[g]), iwres: num(iwres[g]), npde: num(npde[g]) };
      if (Number.isFinite(imputed[g])) rec.imputed = imputed[g];
      observations.push(rec);
    }
  }
  const tests = nObs >= 3 ? npdeTests(npde) : null;
  if (!tests || ![tests.meanTest.pValue, tests.varianceTest.pValue, tests.normalityTest.pValue].every((p) => Number.isFinite(p)))
    warnings.push(`NPDE tests: not all available (${nObs < 3 ? 'fewer than 3 levels' : 'too few distinct NPDE values'}); the NPDE values themselves are still reported`);
  const timeScale = resolveVpcTime(model, o.vpcTime);
  const vpcInput = { model, offset, sims, K, pred, piLevel: o.piLevel, maxBins: o.vpcBins, timeScale };
  const length = vpcSummaryLength(o.vpcBins, K);
  return {
    observations,
    epsilonShrinkage: num(1 - sdIw),
    npde: { replicates: K, censoredMethod: 'censored levels: pde drawn uniformly on [0, P(Y < LLOQ | earlier levels of the subject)] in the decorrelated (Cholesky) sequence and the level imputed at that pde (after Nguyen, Comets & Mentre 2012)', tests },
    vpc: vpcData(vpcInput, vpcPlans[0], parts.vpc.subarray(0, length)),
    pcVpc: vpcData(vpcInput, vpcPlans[1], parts.vpc.subarray(length, 2 * length)),
    covariateRelations: covariateRelations(model, modes),
    warnings,
  };
}

/** Bin edges over sorted times with about equal counts; identical times stay in one bin. */
export function binEdges(sortedTimes: ArrayLike<number>, n: number, maxBins: number): number[] {
  const edges: number[] = [sortedTimes[0]];
  for (let b = 1; b < maxBins; b++) {
    const t = sortedTimes[Math.min(n - 1, Math.floor((b * n) / maxBins))];
    if (t > edges[edges.length - 1]) edges.push(t);
  }
  edges.push(Infinity);
  return edges;
}

interface VpcInput {
  model: SubjectDensity['model'];
  offset: Int32Array;
  sims: Float64Array;
  K: number;
  pred: Float64Array;
  piLevel: number;
  maxBins: number;
  timeScale: 'time' | 'timeAfterDose';
}

function percentileOf(values: Float64Array, n: number, nCensored: number, q: number): number {
  // values: sorted, censored ones first as -Infinity.
  const v = quantileSorted(values, n, q);
  return nCensored > 0 && (q * (n - 1) < nCensored) ? NaN : v;
}

function band(x: Float64Array, m: number, level: number): PercentileBand {
  let k = 0;
  const buf = new Float64Array(m);
  for (let i = 0; i < m; i++) if (x[i] === x[i]) buf[k++] = x[i];
  if (k === 0) return { lo: null, median: null, hi: null };
  const s = buf.subarray(0, k).sort();
  return { lo: num(quantileSorted(s, k, (1 - level) / 2)), median: num(quantileSorted(s, k, 0.5)), hi: num(quantileSorted(s, k, (1 + level) / 2)) };
}

/** One VPC bin's levels: their global indices and, per level, where its replicates start, its stride, LLOQ and correction factor. */
interface VpcPlanBin {
  edge: number;
  members: number[];
  subject: Int32Array;
  simBase: Int32Array;
  stride: Int32Array;
  lloq: Float64Array;
  factor: Float64Array;
}

export interface VpcPlan {
  corrected: boolean;
  times: Float64Array;
  bins: VpcPlanBin[];
}

/** The bins of a VPC (deterministic from the model, the PRED and the options: every thread computes the same). */
function planVpc(input: Omit<VpcInput, 'sims' | 'piLevel'>, corrected: boolean): VpcPlan {
  const { model, offset, K, pred, maxBins, timeScale } = input;
  const nObs = model.nObsTotal;
  const times = new Float64Array(nObs);
  const subjOf = new Int32Array(nObs);
  for (let i = 0; i < model.nSubjects; i++)
    for (let q = 0; q < model.subjects[i].nObs; q++) {
      const t = model.subjects[i].timesH[q];
      let last = 0;
      if (timeScale === 'timeAfterDose') for (const dose of model.subjects[i].doses) if (dose.timeH <= t) last = dose.timeH;
      times[offset[i] + q] = t - last;
      subjOf[offset[i] + q] = i;
    }
  const order = Array.from({ length: nObs }, (_, g) => g).sort((x, y) => times[x] - times[y]);
  const sortedTimes = Float64Array.from(order, (g) => times[g]);
  const edges = nObs > 0 ? binEdges(sortedTimes, nObs, maxBins) : [];
  const bins: VpcPlanBin[] = [];
  for (let b = 0; b + 1 < edges.length; b++) {
    const members = order.filter((g) => times[g] >= edges[b] && times[g] < edges[b + 1]);
    const n = members.length;
    if (n === 0) continue;
    const predSorted = Float64Array.from(members, (g) => pred[g]).filter((x) => Number.isFinite(x)).sort();
    const predBin = quantileSorted(predSorted, predSorted.length, 0.5);
    const bin: VpcPlanBin = { edge: edges[b], members, subject: new Int32Array(n), simBase: new Int32Array(n), stride: new Int32Array(n), lloq: new Float64Array(n), factor: new Float64Array(n) };
    members.forEach((g, m) => {
      const i = subjOf[g];
      const q = g - offset[i];
      const s = model.subjects[i];
      bin.subject[m] = i;
      bin.simBase[m] = offset[i] * K + q;
      bin.stride[m] = s.nObs;
      bin.lloq[m] = s.lloqMgL[q];
      bin.factor[m] = corrected && pred[g] > 0 && predBin > 0 ? predBin / pred[g] : 1;
    });
    bins.push(bin);
  }
  return { corrected, times, bins };
}

/** Words per VPC variant in the replicate summaries: per bin, the 3 simulated percentiles and the censored share, K each. */
export const vpcSummaryLength = (maxBins: number, K: number): number => Math.max(1, Math.ceil(maxBins)) * 4 * K;

/**
 * The simulated percentiles (5, 50, 95 %) and censored share of replicates [k0, k1) in every bin
 * into `out` (bin-major, then percentile, then replicate); each replicate on its own, so any split
 * of the replicates gives the same numbers.
 */
function vpcReplicates(plan: VpcPlan, sims: Float64Array, K: number, k0: number, k1: number, out: Float64Array): void {
  let maxN = 0;
  for (const bin of plan.bins) maxN = Math.max(maxN, bin.members.length);
  const buf = new Float64Array(maxN);
  plan.bins.forEach((bin, b) => {
    const n = bin.members.length;
    const base = b * 4 * K;
    for (let k = k0; k < k1; k++) {
      let c = 0, valid = 0;
      for (let m = 0; m < n; m++) {
        const v = sims[bin.simBase[m] + k * bin.stride[m]];
        if (!(v === v)) continue;
        const lloq = bin.lloq[m];
        if (lloq > 0 && v < lloq) (c++, (buf[valid++] = -Infinity));
        else buf[valid++] = v * bin.factor[m];
      }
      const sv = buf.subarray(0, valid).sort();
      out[base + 3 * K + k] = valid > 0 ? c / valid : NaN;
      out[base + k] = valid > 0 ? percentileOf(sv, valid, c, 0.05) : NaN;
      out[base + K + k] = valid > 0 ? percentileOf(sv, valid, c, 0.5) : NaN;
      out[base + 2 * K + k] = valid > 0 ? percentileOf(sv, valid, c, 0.95) : NaN;
    }
  });
}

/** The VPC's replicate summaries of both variants for replicates [k0, k1): the part the post-fit threads split. */
export function vpcKernel(model: SubjectDensity['model'], parts: SimulationParts, maxBins: number, vpcTime: DiagnosticsOptions['vpcTime']): { plans(): VpcPlan[]; run(k0: number, k1: number): void } {
  let plans: VpcPlan[] | null = null;
  const K = parts.replicates;
  const timeScale = resolveVpcTime(model, vpcTime);
  const get = () => (plans ??= [false, true].map((corrected) => planVpc({ model, offset: parts.offset, K, pred: parts.pred, maxBins, timeScale }, corrected)));
  return {
    plans: get,
    run(k0, k1) {
      get().forEach((plan, v) => vpcReplicates(plan, parts.sims, K, k0, k1, parts.vpc.subarray(v * vpcSummaryLength(maxBins, K), (v + 1) * vpcSummaryLength(maxBins, K))));
    },
  };
}

function resolveVpcTime(model: SubjectDensity['model'], vpcTime: DiagnosticsOptions['vpcTime']): 'time' | 'timeAfterDose' {
  return vpcTime === 'auto' ? (model.subjects.some((x) => x.doses.length > 1) ? 'timeAfterDose' : 'time') : vpcTime;
}

function vpcData(input: VpcInput, plan: VpcPlan, summaries: Float64Array): VpcData {
  const { model, offset, K, piLevel, timeScale } = input;
  const { corrected, times } = plan;
  const bins: VpcBin[] = [];
  plan.bins.forEach((bin, b) => {
    const members = bin.members;
    const n = members.length;
    const obs = new Float64Array(n);
    let nc = 0;
    members.forEach((g, m) => {
      const i = bin.subject[m];
      const q = g - offset[i];
      const s = model.subjects[i];
      if (s.censored[q]) (nc++, (obs[m] = -Infinity));
      else obs[m] = s.y[q] * bin.factor[m];
    });
    obs.sort();
    const base = b * 4 * K;
    const simP = [summaries.subarray(base, base + K), summaries.subarray(base + K, base + 2 * K), summaries.subarray(base + 2 * K, base + 3 * K)];
    const simC = summaries.subarray(base + 3 * K, base + 4 * K);
    const mid = members.map((g) => times[g]).sort((x, y) => x - y);
    bins.push({
      timeLowH: members.length ? times[members[0]] : bin.edge,
      timeHighH: times[members[n - 1]],
      timeMidH: quantileSorted(mid, n, 0.5),
      n,
      observed: { p5: num(percentileOf(obs, n, nc, 0.05)), p50: num(percentileOf(obs, n, nc, 0.5)), p95: num(percentileOf(obs, n, nc, 0.95)) },
      simulated: { p5: band(simP[0], K, piLevel), p50: band(simP[1], K, piLevel), p95: band(simP[2], K, piLevel) },
      censoredFraction: { observed: nc / n, simulated: band(simC, K, piLevel) },
    });
  });
  return { predictionCorrected: corrected, timeScale, replicates: K, piLevel, bins };
}

export interface CovariateRelation {
  /** Parameter whose random effect (at the conditional mode) is related. */
  parameter: string;
  covariate: string;
  kind: 'continuous' | 'categorical';
  /** Continuous: Pearson correlation of eta_mode with the covariate and its two-sided p-value (t-test, n - 2 df). */
  correlation?: number | null;
  pValue?: number | null;
  /** Categorical: mean eta_mode and count per level. */
  levels?: { level: string; n: number; meanEta: number }[];
}

/**
 * Random effects at the conditional modes against every covariate in the dataset, the usual
 * screen for a missing covariate effect (common practice; read it with the shrinkage: at high
 * shrinkage modes shrink towards 0 and hide relations, Savic & Karlsson 2009).
 */
export function covariateRelations(model: SubjectDensity['model'], modes: ModeResult): CovariateRelation[] {
  const out: CovariateRelation[] = [];
  const N = model.nSubjects;
  const d = model.nEta;
  for (let k = 0; k < d; k++) {
    const parameter = model.parameters[model.etaParameter[k]].name;
    for (const covariate of model.dataset.covariateNames) {
      const values = model.dataset.subjects.map((s) => s.covariates[covariate]);
      if (values.some((v) => v === undefined)) continue;
      if (values.every((v) => typeof v === 'number')) {
        let sx = 0, sy = 0, sxx = 0, syy = 0, sxy = 0;
        for (let i = 0; i < N; i++) {
          const x = values[i] as number;
          const y = modes.eta[i * d + k];
          sx += x, sy += y, sxx += x * x, syy += y * y, sxy += x * y;
        }
        const cov = sxy - (sx * sy) / N;
        const r = cov / Math.sqrt((sxx - (sx * sx) / N) * (syy - (sy * sy) / N));
        const t = r * Math.sqrt((N - 2) / Math.max(1e-300, 1 - r * r));
        out.push({ parameter, covariate, kind: 'continuous', correlation: num(r), pValue: N > 2 ? num(studentTTwoSided(t, N - 2)) : null });
      } else {
        const byLevel = new Map<string, { n: number; sum: number }>();
        values.forEach((v, i) => {
          const key = String(v);
          const e = byLevel.get(key) ?? { n: 0, sum: 0 };
          e.n++;
          e.sum += modes.eta[i * d + k];
          byLevel.set(key, e);
        });
        out.push({ parameter, covariate, kind: 'categorical', levels: [...byLevel.entries()].sort((a, b) => (a[0] < b[0] ? -1 : 1)).map(([level, e]) => ({ level, n: e.n, meanEta: e.sum / e.n })) });
      }
    }
  }
  return out;
}
