/**
 * Metropolis-Hastings kernels shared by the estimator (engine/saem), the post-fit conditional
 * distribution (engine/posthoc) and dose individualisation (engine/dosing) (Robert & Casella,
 * Monte Carlo Statistical Methods, 2nd ed. 2004, ch. 6-7, from memory).
 *
 * Small-kernel style (../../shared/STYLE.md): a kernel is built once from its dimension and
 * fixed configuration (degrees of freedom, whether the proposal is the target's prior) and owns
 * its scratch; a step `(rng, target, state, ...proposal) -> accepted` moves `state` in place and
 * allocates nothing. The proposal's factor, centre and scale are step arguments because the
 * estimator refreshes them between iterations (Omega after each M-step, adapted scales) and
 * shares one kernel across subjects. A non-finite log density is a rejection, never an error.
 *
 * The target is split into log-likelihood + log-prior so that the independence kernel whose
 * proposal is the prior itself accepts on the likelihood ratio alone (the prior cancels); a
 * target without that split puts its whole log density in `logLikelihood` and returns 0 from
 * `logPrior`.
 */
import type { RngStream } from '../rng/index.js';

/** The density a chain targets, over a position of `dim` numbers. */
export interface LogDensityTarget {
  readonly dim: number;
  /** log p(y | x) (or the whole log density); -Infinity or NaN where the model fails. */
  logLikelihood(x: Float64Array): number;
  /** log p(x) up to a constant; 0 when `logLikelihood` carries the whole density. */
  logPrior(x: Float64Array): number;
  /** Called when the point last passed to `logLikelihood` is accepted (e.g. to keep its predictions). */
  accept?(): void;
}

/** What the next step needs. */
export interface ChainState {
  /** Current position (length dim; the kernels write into it). */
  position: Float64Array;
  /** Cached target.logLikelihood(position). */
  logLikelihood: number;
  /** Cached target.logPrior(position). */
  logPrior: number;
}

export function initChainState(target: LogDensityTarget, position: Float64Array): ChainState {
  return { position, logLikelihood: target.logLikelihood(position), logPrior: target.logPrior(position) };
}

/** Refresh the cached log densities after the target changed (e.g. new population parameters). */
export function refreshChainState(target: LogDensityTarget, state: ChainState): void {
  state.logLikelihood = target.logLikelihood(state.position);
  state.logPrior = target.logPrior(state.position);
}

const finite = (x: number): boolean => x === x && x !== Infinity && x !== -Infinity;

/** out = centre + w L z (L lower triangular, d x d row-major). */
function affine(centre: ArrayLike<number> | null, chol: Float64Array, d: number, w: number, z: Float64Array, out: Float64Array): void {
  for (let r = 0; r < d; r++) {
    let v = 0;
    for (let c = 0; c <= r; c++) v += chol[r * d + c] * z[c];
    out[r] = (centre ? centre[r] : 0) + w * v;
  }
}

/**
 * Multivariate Student-t draw (integer df): out = m + L z sqrt(df / chi2_df), z standard normal
 * first, then the chi-square as 2 x (sum of df/2 exponentials) plus one squared normal for odd df.
 * Returns log q(out) up to the normalising constant.
 */
export function drawStudentT(rng: RngStream, m: ArrayLike<number>, chol: Float64Array, d: number, df: number, z: Float64Array, out: Float64Array): number {
  for (let k = 0; k < d; k++) z[k] = rng.normal();
  let chi = 0;
  for (let k = 1; k < df; k += 2) chi += 2 * rng.exponential();
  if (df % 2 === 1) {
    const g = rng.normal();
    chi += g * g;
  }
  const w = Math.sqrt(df / chi);
  let q = 0;
  for (let r = 0; r < d; r++) {
    let v = 0;
    for (let c = 0; c <= r; c++) v += chol[r * d + c] * z[c];
    out[r] = m[r] + w * v;
    q += z[r] * z[r] * w * w;
  }
  return -0.5 * (df + d) * Math.log1p(q / df);
}

/** log q(x) of the Student-t with location m and scale L L' (same constant as drawStudentT); z is scratch. */
export function logStudentTKernel(x: ArrayLike<number>, m: ArrayLike<number>, chol: Float64Array, d: number, df: number, z: Float64Array): number {
  return -0.5 * (df + d) * Math.log1p(mahalanobis(x, m, chol, d, z) / df);
}

/** (x - m)' (L L')^-1 (x - m) by forward substitution; z is scratch. */
export function mahalanobis(x: ArrayLike<number>, m: ArrayLike<number>, chol: Float64Array, d: number, z: Float64Array): number {
  let q = 0;
  for (let r = 0; r < d; r++) {
    let s = x[r] - m[r];
    for (let c = 0; c < r; c++) s -= chol[r * d + c] * z[c];
    z[r] = s / chol[r * d + r];
    q += z[r] * z[r];
  }
  return q;
}

export interface IndependenceConfig {
  dim: number;
  /** Degrees of freedom of a Student-t proposal (whole number >= 1); null for a Gaussian. */
  df: number | null;
  /**
   * The proposal N(centre, L L') is the target's prior: accept on the likelihood ratio alone
   * (the prior cancels with the proposal). Gaussian only.
   */
  priorProposal: boolean;
}

export interface IndependenceKernel {
  readonly config: Readonly<IndependenceConfig>;
  /** One independence step from `centre` + L x (Gaussian or Student-t); true when accepted. */
  step(rng: RngStream, target: LogDensityTarget, state: ChainState, centre: ArrayLike<number>, chol: Float64Array): boolean;
}

export function buildIndependenceKernel(config: IndependenceConfig): IndependenceKernel {
  const { dim: d, df, priorProposal } = config;
  if (!(Number.isInteger(d) && d >= 0)) throw new RangeError(`an MH kernel needs a whole-number dimension >= 0, got ${d}`);
  if (df !== null && !(Number.isInteger(df) && df >= 1)) throw new RangeError(`the Student-t proposal needs a whole number of degrees of freedom >= 1, got ${df}`);
  if (priorProposal && df !== null) throw new RangeError('a proposal equal to the prior is Gaussian: set df to null');
  const z = new Float64Array(d);
  const prop = new Float64Array(d);
  const cfg = Object.freeze({ ...config });
  // log q up to a constant shared by all points (it cancels in the ratio).
  const logQ = (x: ArrayLike<number>, centre: ArrayLike<number>, chol: Float64Array): number => {
    const q = mahalanobis(x, centre, chol, d, z);
    return df === null ? -0.5 * q : -0.5 * (df + d) * Math.log1p(q / df);
  };
  return {
    config: cfg,
    step(rng, target, state, centre, chol) {
      let lqProp = 0;
      if (df === null) {
        for (let k = 0; k < d; k++) z[k] = rng.normal();
        let q = 0;
        for (let k = 0; k < d; k++) q += z[k] * z[k];
        affine(centre, chol, d, 1, z, prop);
        lqProp = -0.5 * q;
      } else lqProp = drawStudentT(rng, centre, chol, d, df, z, prop);
      const ll = target.logLikelihood(prop);
      if (!finite(ll)) return false;
      let logRatio: number;
      let lpr = 0;
      if (priorProposal) logRatio = ll - state.logLikelihood;
      else {
        lpr = target.logPrior(prop);
        if (!finite(lpr)) return false;
        const lqCur = logQ(state.position, centre, chol);
        logRatio = ll + lpr - state.logLikelihood - state.logPrior + lqCur - lqProp;
      }
      if (!(Math.log(rng.uniform()) < logRatio)) return false;
      if (priorProposal) lpr = target.logPrior(prop);
      state.position.set(prop);
      state.logLikelihood = ll;
      state.logPrior = lpr;
      target.accept?.();
      return true;
    },
  };
}

export interface RandomWalkKernel {
  readonly dim: number;
  /** One step x* = x + scale L z, z ~ N(0, I); true when accepted. */
  step(rng: RngStream, target: LogDensityTarget, state: ChainState, chol: Float64Array, scale: number): boolean;
}

/** Full random walk N(x, scale^2 L L') (symmetric: Metropolis ratio). */
export function buildRandomWalkKernel(dim: number): RandomWalkKernel {
  if (!(Number.isInteger(dim) && dim >= 0)) throw new RangeError(`an MH kernel needs a whole-number dimension >= 0, got ${dim}`);
  const d = dim;
  const z = new Float64Array(d);
  const prop = new Float64Array(d);
  return {
    dim,
    step(rng, target, state, chol, scale) {
      for (let k = 0; k < d; k++) z[k] = rng.normal();
      affine(state.position, chol, d, scale, z, prop);
      const ll = target.logLikelihood(prop);
      if (!finite(ll)) return false;
      const lpr = target.logPrior(prop);
      if (!finite(lpr)) return false;
      if (!(Math.log(rng.uniform()) < ll + lpr - state.logLikelihood - state.logPrior)) return false;
      state.position.set(prop);
      state.logLikelihood = ll;
      state.logPrior = lpr;
      target.accept?.();
      return true;
    },
  };
}

export interface ComponentwiseKernel {
  readonly dim: number;
  /**
   * One sweep: for k = 0..dim-1, x*_k = x_k + sd[k] z (Metropolis ratio). Adds 1 to
   * accepted[k] for each accepted component when given; returns the number accepted.
   */
  sweep(rng: RngStream, target: LogDensityTarget, state: ChainState, sd: ArrayLike<number>, accepted?: Float64Array): number;
}

/** Component-wise (Metropolis-within-Gibbs) random walk with per-component step SDs. */
export function buildComponentwiseKernel(dim: number): ComponentwiseKernel {
  if (!(Number.isInteger(dim) && dim >= 0)) throw new RangeError(`an MH kernel needs a whole-number dimension >= 0, got ${dim}`);
  const d = dim;
  const prop = new Float64Array(d);
  return {
    dim,
    sweep(rng, target, state, sd, accepted) {
      const x = state.position;
      prop.set(x);
      let n = 0;
      for (let k = 0; k < d; k++) {
        prop[k] = x[k] + sd[k] * rng.normal();
        const ll = target.logLikelihood(prop);
        let ok = false;
        if (finite(ll)) {
          const lpr = target.logPrior(prop);
          if (finite(lpr) && Math.log(rng.uniform()) < ll + lpr - state.logLikelihood - state.logPrior) {
            x[k] = prop[k];
            state.logLikelihood = ll;
            state.logPrior = lpr;
            target.accept?.();
            ok = true;
          }
        }
        if (ok) {
          n++;
          if (accepted) accepted[k]++;
        } else prop[k] = x[k];
      }
      return n;
    },
  };
}

/**
 * Robbins-Monro adaptation of proposal scales towards a target acceptance: after each batch,
 * s <- clamp(s (1 + rate (accepted / tries - target)), min, max), then the counts restart
 * (multiplicative form of Andrieu & Thoms, Stat Comput 2008;18:343-373, from memory). With a
 * batch of one step and rate 0.07, target 0.3, accept multiplies by 1.049 and reject by 0.979.
 * init / update / final over a small record; `final` freezes the scales.
 */
export interface ScaleAdaptationConfig {
  target: number;
  rate: number;
  min: number;
  max: number;
}

export interface ScaleAdaptationState {
  /** Current scales (one per adapted proposal or component). */
  scale: Float64Array;
  /** Accepted proposals since the last update (the caller adds to it). */
  accepted: Float64Array;
  /** Proposals since the last update (the caller adds to it). */
  tries: Float64Array;
  /** Updates so far. */
  updates: number;
}

export interface ScaleAdaptation {
  readonly config: Readonly<ScaleAdaptationConfig>;
  init(n: number, initial: number): ScaleAdaptationState;
  /** Adapt every scale with tries > 0 from its batch counts, then reset the counts. */
  update(state: ScaleAdaptationState): void;
  /** The frozen scales (a copy). */
  final(state: ScaleAdaptationState): Float64Array;
}

export function scaleAdaptation(config: ScaleAdaptationConfig): ScaleAdaptation {
  const { target, rate, min, max } = config;
  if (!(target > 0 && target < 1)) throw new RangeError(`target acceptance must lie in (0, 1), got ${target}`);
  if (!(rate > 0) || !(min > 0) || !(max >= min)) throw new RangeError(`scale adaptation needs rate > 0 and 0 < min <= max, got rate ${rate}, min ${min}, max ${max}`);
  return {
    config: Object.freeze({ ...config }),
    init(n, initial) {
      return { scale: new Float64Array(n).fill(initial), accepted: new Float64Array(n), tries: new Float64Array(n), updates: 0 };
    },
    update(s) {
      for (let k = 0; k < s.scale.length; k++) {
        if (s.tries[k] > 0) s.scale[k] = Math.min(max, Math.max(min, s.scale[k] * (1 + rate * (s.accepted[k] / s.tries[k] - target))));
        s.accepted[k] = 0;
        s.tries[k] = 0;
      }
      s.updates++;
    },
    final(s) {
      return Float64Array.from(s.scale);
    },
  };
}
