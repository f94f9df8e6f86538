/**
 * The estimator's schedules, each a small pure function of the iteration: the step size of the
 * stochastic approximation, the settle window and the settle test that ends
 * the search phase.
 */

/**
 * Step size gamma_k: 1 in the search phase; in the averaging phase 1/(k - K1 + W)^alpha, where
 * W is the number of search iterations whose mean statistics opened the phase (so the average
 * runs over every draw from iteration K1 - W + 1 on).
 */
export function stepSize(iteration: number, searchEnd: number | null, warmCount: number, exponent: number): number {
  return searchEnd === null ? 1 : Math.pow(iteration - searchEnd + warmCount, -exponent);
}

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
