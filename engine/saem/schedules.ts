/**
 * The estimator's schedules: the step size of the stochastic approximation and the annealing of
 * the variances, each an init / update / final record whose state createSaemRun holds but does
 * not read, and the settle window and settle test that end the search phase.
 */
import type { PopulationParameters } from '../stats/model.js';
import type { SaemSettings } from './settings.js';

/**
 * Step size gamma_k: 1 in the search phase; in the averaging phase 1/(k - K1 + W)^alpha, where
 * W is the number of search iterations whose mean statistics opened the phase (so the average
 * runs over every draw from iteration K1 - W + 1 on).
 */
export function stepSize(iteration: number, searchEnd: number | null, warmCount: number, exponent: number): number {
  return searchEnd === null ? 1 : Math.pow(iteration - searchEnd + warmCount, -exponent);
}

/** State of the step-size schedule: the phase switch and the warm-start window it opened with. */
export interface StepSizeSchedule {
  readonly exponent: number;
  /** Last search iteration; null while the search phase runs. */
  searchEnd: number | null;
  /** Search iterations whose mean statistics opened the averaging phase. */
  warmCount: number;
}

export const stepSizeSchedule = {
  init(settings: SaemSettings): StepSizeSchedule {
    return { exponent: settings.stepExponent, searchEnd: null, warmCount: 0 };
  },
  /** gamma_k of iteration k. */
  update(schedule: StepSizeSchedule, iteration: number): number {
    return stepSize(iteration, schedule.searchEnd, schedule.warmCount, schedule.exponent);
  },
  /** The phase switch: the search ended at searchEnd, warmCount iterations opened the averaging. */
  final(schedule: StepSizeSchedule, searchEnd: number, warmCount: number): void {
    schedule.searchEnd = searchEnd;
    schedule.warmCount = warmCount;
  },
};

/**
 * State of the annealing schedule: for its first `iterations` search iterations, variances
 * (Omega's diagonal, the residual error) fall by at most (1 - tau) per iteration.
 */
export interface AnnealingSchedule {
  readonly iterations: number;
  readonly tau: number;
  /** Whether the current iteration anneals. */
  active: boolean;
}

export const annealingSchedule = {
  init(settings: SaemSettings): AnnealingSchedule {
    return { iterations: settings.annealingIterations ?? Math.floor(settings.searchMinIterations / 2), tau: settings.annealingTau, active: false };
  },
  /** Does iteration k anneal? Only while the search phase runs. */
  update(schedule: AnnealingSchedule, iteration: number, searching: boolean): boolean {
    schedule.active = searching && iteration <= schedule.iterations;
    return schedule.active;
  },
  /** The floor annealing keeps on a variance (an Omega diagonal) whose previous value was previousVariance. */
  varianceFloor(schedule: AnnealingSchedule, previousVariance: number): number {
    return schedule.tau * previousVariance;
  },
  /** The same floor on the variance of an error SD whose previous value was previousSd (tau sd^2, in that order). */
  sdVarianceFloor(schedule: AnnealingSchedule, previousSd: number): number {
    return schedule.tau * previousSd * previousSd;
  },
  /**
   * The floor annealing keeps on the combined error after the numerical step (which the closed
   * form M-step does not move): a and b fall by at most a factor sqrt(tau), so their variances
   * by at most tau.
   */
  holdCombinedError(schedule: AnnealingSchedule, theta: PopulationParameters, aBefore: number, bBefore: number): void {
    if (!schedule.active) return;
    theta.a = Math.max(theta.a, Math.sqrt(schedule.tau) * aBefore);
    theta.b = Math.max(theta.b, Math.sqrt(schedule.tau) * bBefore);
  },
  /** After the search: annealing never runs in the averaging phase. */
  final(schedule: AnnealingSchedule): void {
    schedule.active = false;
  },
};

/** The settle window: at most half the minimum search length (so a short search can still settle), at least 5. */
export function effectiveSettleWindow(settleWindow: number, searchMinIterations: number): number {
  return Math.max(5, Math.min(settleWindow, Math.floor(searchMinIterations / 2)));
}

/**
 * Has the search settled at iteration k? For every estimate on its working scale (log for
 * positive quantities), the means of the last two windows of W iterations differ by at most
 * tolerance x their mean within-window SD (plus a small absolute slack).
 */
export function settledAt(k: number, trajectory: Float64Array, nEst: number, positive: Uint8Array, W: number, tolerance: number): boolean {
  if (k < 2 * W) return false;
  for (let e = 0; e < nEst; e++) {
    let s1 = 0, s2 = 0, q1 = 0, q2 = 0;
    for (let it = k - 2 * W; it < k; it++) {
      let v = trajectory[it * nEst + e];
      if (positive[e]) v = Math.log(v);
      if (it < k - W) (s1 += v), (q1 += v * v);
      else (s2 += v), (q2 += v * v);
    }
    const m1 = s1 / W, m2 = s2 / W;
    const sd1 = Math.sqrt(Math.max(0, q1 / W - m1 * m1));
    const sd2 = Math.sqrt(Math.max(0, q2 / W - m2 * m2));
    if (Math.abs(m2 - m1) > tolerance * 0.5 * (sd1 + sd2) + 1e-4 * (1 + Math.abs(m2))) return false;
  }
  return true;
}
