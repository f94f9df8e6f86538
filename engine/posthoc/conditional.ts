/**
 * Conditional distribution of each subject's random effects at the population estimate,
 * p(eta_i | y_i; theta_hat), by Metropolis-Hastings (Robert & Casella, Monte Carlo Statistical
 * Methods, 2nd ed. 2004, ch. 7, from memory; the shared kernels of engine/mcmc) with two moves
 * per iteration, both scaled by the
 * Laplace covariance C_i at the mode: an independent multivariate Student-t proposal centred at
 * the mode, and a random walk N(eta, s^2 C_i) with s adapted during warm-up towards 30 %
 * acceptance (start 2.38 / sqrt(d), Gelman, Roberts & Gilks 1996). The chain runs in batches
 * until the running means and SDs settle (compared with their values at half the length) or
 * the cap is reached; a thinned reservoir of draws is kept for quantiles, Louis' formula and
 * dosing. Shrinkage: Savic & Karlsson 2009 (1 - SD(eta_mode) / omega and the variance
 * version); per subject, var(eta_i | y_i) / omega^2 (Xu et al. 2012, from memory).
 */
import { cholesky } from '../linalg/index.js';
import { createStreams } from '../rng/index.js';
import type { SubjectDensity } from './density.js';
import { logGamma, quantileSorted } from './distributions.js';
import { f64, i32, list, u8, type ModeResult } from './modes.js';
import {
  buildIndependenceKernel,
  buildRandomWalkKernel,
  drawStudentT,
  logStudentTKernel,
  scaleAdaptation,
  type ChainState,
  type LogDensityTarget,
} from '../mcmc/kernels.js';

// Warm-up adaptation towards 30 % acceptance, one step per batch: accept x1.049, reject x0.979.
const RW_ADAPTATION = scaleAdaptation({ target: 0.3, rate: 0.07, min: 1e-6, max: 1e6 });

export interface ConditionalOptions {
  seed: number;
  /** Warm-up iterations (scale adaptation; not used for the summaries). */
  warmup: number;
  /** Iterations per batch between settle checks. */
  batch: number;
  /** Minimum batches after warm-up. */
  minBatches: number;
  /** Cap on iterations after warm-up. */
  maxIterations: number;
  /** Settled when every running mean moved by less than tol x SD and every SD by less than tol (relative). */
  tolerance: number;
  /** Draws kept per subject (evenly thinned). */
  keepDraws: number;
  /** Degrees of freedom of the independent proposal. */
  proposalDf: number;
}

export const DEFAULT_CONDITIONAL: Readonly<ConditionalOptions> = Object.freeze({
  seed: 1,
  warmup: 100,
  batch: 100,
  minBatches: 4,
  maxIterations: 5000,
  tolerance: 0.1,
  keepDraws: 200,
  proposalDf: 5,
});

export interface ConditionalResult {
  nEta: number;
  /** Conditional mean of eta, N x nEta. */
  mean: Float64Array;
  /** Conditional covariance of eta, N x nEta x nEta. */
  covariance: Float64Array;
  /** Natural-scale conditional mean and SD of each parameter, N x nParams. */
  meanNatural: Float64Array;
  sdNatural: Float64Array;
  /** Natural-scale 2.5 %, 50 %, 97.5 % quantiles, N x nParams each. */
  q025: Float64Array;
  q50: Float64Array;
  q975: Float64Array;
  /** Kept draws of eta, N x keepDraws x nEta (the first nKept[i] of subject i are valid). */
  draws: Float64Array;
  keepDraws: number;
  nKept: Int32Array;
  /** Iterations after warm-up. */
  iterations: Int32Array;
  settled: Uint8Array;
  /** Acceptance rate of the random-walk and independent moves, per subject. */
  acceptanceRandomWalk: Float64Array;
  acceptanceIndependent: Float64Array;
  warnings: string[];
}

// The Student-t draw and its log kernel live with the shared kernels; re-exported for the
// importance sampler (likelihood.ts).
export { drawStudentT, logStudentTKernel };

/** Normalising constant of the multivariate t density with scale L L'. */
export function logStudentTConstant(chol: Float64Array, d: number, df: number): number {
  let logDet = 0;
  for (let k = 0; k < d; k++) logDet += Math.log(chol[k * d + k]);
  return logGamma((df + d) / 2) - logGamma(df / 2) - 0.5 * d * Math.log(df * Math.PI) - logDet;
}

export function conditionalDistribution(density: SubjectDensity, modes: ModeResult, options: Partial<ConditionalOptions> = {}): ConditionalResult {
  const o = resolveConditionalOptions(options);
  const res = allocateConditional(density.model, o.keepDraws, false);
  conditionalKernel(density, modes, res, o).run(0, density.model.nSubjects);
  concludeConditional(density.model, res, o);
  return res;
}

/** The options with their defaults, checked. */
export function resolveConditionalOptions(options: Partial<ConditionalOptions>): ConditionalOptions {
  const o = { ...DEFAULT_CONDITIONAL, ...options };
  if (!(Number.isInteger(o.proposalDf) && o.proposalDf >= 1)) throw new RangeError(`the Student-t proposal needs a whole number of degrees of freedom >= 1, got ${o.proposalDf}`);
  return o;
}

/** Per-subject outputs (in SharedArrayBuffers when `shared`, for engine/posthoc/threads.ts). */
export function allocateConditional(model: SubjectDensity['model'], keepDraws: number, shared: boolean): ConditionalResult {
  const N = model.nSubjects;
  const d = model.nEta;
  const p = model.nParams;
  const K = keepDraws;
  return {
    nEta: d,
    mean: f64(N * d, shared),
    covariance: f64(N * d * d, shared),
    meanNatural: f64(N * p, shared),
    sdNatural: f64(N * p, shared),
    q025: f64(N * p, shared),
    q50: f64(N * p, shared),
    q975: f64(N * p, shared),
    draws: f64(N * K * d, shared),
    keepDraws: K,
    nKept: i32(N, shared),
    iterations: i32(N, shared),
    settled: u8(N, shared),
    acceptanceRandomWalk: f64(N, shared),
    acceptanceIndependent: f64(N, shared),
    warnings: [],
  };
}

/**
 * The conditional distributions of subjects [from, to) into `res`: each subject's chain draws
 * from its own stream ('posthoc', 'conditional', i) and writes only its own entries.
 */
export function conditionalKernel(density: SubjectDensity, modes: ModeResult, res: ConditionalResult, o: ConditionalOptions): { run(from: number, to: number): void } {
  const model = density.model;
  const d = density.nEta;
  const p = model.nParams;
  const K = o.keepDraws;
  const root = createStreams(o.seed);
  let maxObs = 0;
  for (const s of model.subjects) maxObs = Math.max(maxObs, s.nObs);
  const f = new Float64Array(maxObs);
  const cur = new Float64Array(d);
  const chol = new Float64Array(d * d);
  const sum = new Float64Array(d);
  const sumSq = new Float64Array(d * d);
  const maxChecks = Math.ceil(o.maxIterations / o.batch) + 1;
  const checkMean = new Float64Array(maxChecks * d);
  const checkSd = new Float64Array(maxChecks * d);
  const phiRow = new Float64Array(p);
  const natRow = new Float64Array(p);
  const natSum = new Float64Array(p);
  const natSq = new Float64Array(p);
  const sortBuf = new Float64Array(K);
  const mode = new Float64Array(d);
  // Target: the log joint density of subject `subject` (all in logLikelihood; no prior split needed).
  const target: LogDensityTarget & { subject: number; f: Float64Array } = {
    dim: d,
    subject: 0,
    f,
    logLikelihood(x) {
      return density.logJoint(this.subject, x, this.f);
    },
    logPrior: () => 0,
  };
  const state: ChainState = { position: cur, logLikelihood: 0, logPrior: 0 };
  const independent = buildIndependenceKernel({ dim: d, df: o.proposalDf, priorProposal: false });
  const randomWalk = buildRandomWalkKernel(d);
  return {
    run(from, to) {
      for (let i = from; i < to; i++) {
        const rng = root.stream('posthoc', 'conditional', i);
        const fi = f.subarray(0, model.subjects[i].nObs);
        for (let k = 0; k < d; k++) mode[k] = modes.eta[i * d + k];
        const natBase = i * p;
        if (d === 0) {
          density.phiOf(i, cur, phiRow);
          model.toNatural(phiRow, natRow);
          for (let j = 0; j < p; j++) {
            res.meanNatural[natBase + j] = res.q025[natBase + j] = res.q50[natBase + j] = res.q975[natBase + j] = natRow[j];
          }
          res.settled[i] = 1;
          continue;
        }
        chol.set(modes.laplaceCovariance.subarray(i * d * d, (i + 1) * d * d));
        if (!cholesky(chol, d, chol)) {
          chol.set(density.theta.omega);
          cholesky(chol, d, chol);
        }
        cur.set(mode);
        target.subject = i;
        target.f = fi;
        state.logLikelihood = target.logLikelihood(cur);
        state.logPrior = 0;
        const adapt = RW_ADAPTATION.init(1, 2.38 / Math.sqrt(d));
        let accRw = 0, accInd = 0, n = 0;
        sum.fill(0);
        sumSq.fill(0);
        let stride = 1;
        let kept = 0;
        let checks = 0;
        let settled = false;
        const drawBase = i * K * d;
        const total = o.warmup + o.maxIterations;
        for (let it = 0; it < total; it++) {
          // Independent Student-t move from the Laplace approximation, then a random walk N(eta, s^2 C).
          const acceptedInd = independent.step(rng, target, state, mode, chol);
          if (acceptedInd && it >= o.warmup) accInd++;
          const accepted = randomWalk.step(rng, target, state, chol, adapt.scale[0]);
          if (it < o.warmup) {
            adapt.tries[0] = 1;
            adapt.accepted[0] = accepted ? 1 : 0;
            RW_ADAPTATION.update(adapt);
            continue;
          }
          if (accepted) accRw++;
          n++;
          for (let r = 0; r < d; r++) {
            sum[r] += cur[r];
            for (let c = 0; c <= r; c++) sumSq[r * d + c] += cur[r] * cur[c];
          }
          // Reservoir with doubling stride: keeps at most K evenly spaced draws.
          if ((n - 1) % stride === 0) {
            if (kept === K) {
              for (let q = 0; q < K / 2; q++) for (let k = 0; k < d; k++) res.draws[drawBase + q * d + k] = res.draws[drawBase + 2 * q * d + k];
              kept = K >> 1;
              stride *= 2;
            }
            if ((n - 1) % stride === 0) {
              for (let k = 0; k < d; k++) res.draws[drawBase + kept * d + k] = cur[k];
              kept++;
            }
          }
          if (n % o.batch === 0) {
            for (let r = 0; r < d; r++) {
              const m = sum[r] / n;
              checkMean[checks * d + r] = m;
              checkSd[checks * d + r] = Math.sqrt(Math.max(0, sumSq[r * d + r] / n - m * m));
            }
            checks++;
            if (checks >= o.minBatches) {
              const h = (checks >> 1) - 1;
              let ok = true;
              for (let r = 0; r < d && ok; r++) {
                const sdNow = checkSd[(checks - 1) * d + r];
                if (Math.abs(checkMean[(checks - 1) * d + r] - checkMean[h * d + r]) > o.tolerance * sdNow) ok = false;
                if (Math.abs(sdNow / checkSd[h * d + r] - 1) > o.tolerance) ok = false;
              }
              if (ok) {
                settled = true;
                break;
              }
            }
          }
        }
        res.iterations[i] = n;
        res.settled[i] = settled ? 1 : 0;
        res.nKept[i] = kept;
        res.acceptanceRandomWalk[i] = n > 0 ? accRw / n : NaN;
        res.acceptanceIndependent[i] = n > 0 ? accInd / n : NaN;
        for (let r = 0; r < d; r++) {
          const m = sum[r] / n;
          res.mean[i * d + r] = m;
          for (let c = 0; c <= r; c++) {
            const v = sumSq[r * d + c] / n - m * (sum[c] / n);
            res.covariance[i * d * d + r * d + c] = res.covariance[i * d * d + c * d + r] = v * n / Math.max(1, n - 1);
          }
        }
        // Natural-scale summaries from the kept draws.
        natSum.fill(0);
        natSq.fill(0);
        for (let q = 0; q < kept; q++) {
          density.phiOf(i, res.draws.subarray(drawBase + q * d, drawBase + (q + 1) * d), phiRow);
          model.toNatural(phiRow, natRow);
          for (let j = 0; j < p; j++) (natSum[j] += natRow[j]), (natSq[j] += natRow[j] * natRow[j]);
        }
        for (let j = 0; j < p; j++) {
          const m = natSum[j] / kept;
          res.meanNatural[natBase + j] = m;
          res.sdNatural[natBase + j] = Math.sqrt(Math.max(0, (natSq[j] / kept - m * m) * kept / Math.max(1, kept - 1)));
          const k = model.parameters[j].etaIndex;
          if (k < 0) {
            density.phiOf(i, res.draws.subarray(drawBase, drawBase + d), phiRow);
            model.toNatural(phiRow, natRow);
            res.q025[natBase + j] = res.q50[natBase + j] = res.q975[natBase + j] = natRow[j];
            res.sdNatural[natBase + j] = 0;
            continue;
          }
          // The transforms are monotone: quantiles of psi are psi of the quantiles of eta.
          for (let q = 0; q < kept; q++) sortBuf[q] = res.draws[drawBase + q * d + k];
          const view = sortBuf.subarray(0, kept).sort();
          for (const [target, prob] of [[res.q025, 0.025], [res.q50, 0.5], [res.q975, 0.975]] as const) {
            const e = quantileSorted(view, kept, prob);
            phiRow[j] = density.meanPhi[i * p + j] + e;
            model.toNatural(phiRow, natRow);
            target[natBase + j] = natRow[j];
          }
        }
      }
    },
  };
}

/** The warning for subjects whose chains had not settled, in subject order. */
export function concludeConditional(model: SubjectDensity['model'], res: ConditionalResult, o: ConditionalOptions): void {
  const unsettled: string[] = [];
  for (let i = 0; i < model.nSubjects; i++) if (model.nEta > 0 && !res.settled[i]) unsettled.push(model.subjects[i].id);
  if (unsettled.length)
    res.warnings.push(
      `conditional distribution: the running means and SDs of subject(s) ${list(unsettled)} had not settled after ${o.maxIterations} iterations; their conditional means, SDs and quantiles are less precise (raise the cap)`,
    );
}

export interface Shrinkage {
  /** Per random effect: 1 - SD(eta_mode) / omega (Savic & Karlsson 2009). */
  etaSd: number[];
  /** Per random effect: 1 - var(eta_mode) / omega^2. */
  etaVariance: number[];
  /** Same with the conditional means instead of the modes. */
  etaSdConditionalMean: number[];
  /** Per subject and random effect: var(eta_i | y_i) / omega^2, N x nEta. */
  individual: Float64Array;
}

function sampleSd(x: ArrayLike<number>, n: number, stride: number, offset: number): number {
  let s = 0, s2 = 0;
  for (let i = 0; i < n; i++) {
    const v = x[i * stride + offset];
    s += v;
    s2 += v * v;
  }
  const m = s / n;
  return Math.sqrt(Math.max(0, (s2 - n * m * m) / Math.max(1, n - 1)));
}

export function etaShrinkage(density: SubjectDensity, modes: ModeResult, conditional: ConditionalResult): Shrinkage {
  const N = density.model.nSubjects;
  const d = density.nEta;
  const out: Shrinkage = { etaSd: [], etaVariance: [], etaSdConditionalMean: [], individual: new Float64Array(N * d) };
  for (let k = 0; k < d; k++) {
    const omega = Math.sqrt(density.theta.omega[k * d + k]);
    const sdMode = sampleSd(modes.eta, N, d, k);
    out.etaSd.push(1 - sdMode / omega);
    out.etaVariance.push(1 - (sdMode * sdMode) / (omega * omega));
    out.etaSdConditionalMean.push(1 - sampleSd(conditional.mean, N, d, k) / omega);
    for (let i = 0; i < N; i++) out.individual[i * d + k] = conditional.covariance[i * d * d + k * d + k] / (omega * omega);
  }
  return out;
}
