/**
 * Central finite differences into caller-owned buffers (no allocation, for the per-draw loop of
 * Louis' formula and the BFGS minimiser): gradient error O(h^2), Hessian by the four-point cross
 * formula (Nocedal & Wright, Numerical Optimization, 2nd ed. 2006, section 8.1, from memory). A non-finite
 * objective counts as +Infinity, so a derivative across an impossible point is NaN, never thrown.
 */

export type Objective = (x: Float64Array) => number;

/** f(x), with NaN and -Infinity read as +Infinity (an impossible point). */
export function safeObjective(f: Objective, x: Float64Array): number {
  const v = f(x);
  return v === v && v !== -Infinity ? v : Infinity;
}

/** Central-difference gradient of f at x into g (x restored); NaN where a side is not finite. */
export function centralGradient(f: Objective, x: Float64Array, g: Float64Array, h: number): void {
  for (let i = 0; i < x.length; i++) {
    const xi = x[i];
    const step = h * (1 + Math.abs(xi));
    x[i] = xi + step;
    const fp = safeObjective(f, x);
    x[i] = xi - step;
    const fm = safeObjective(f, x);
    x[i] = xi;
    g[i] = fp === Infinity || fm === Infinity ? NaN : (fp - fm) / (2 * step);
  }
}

/** Central-difference Hessian of f at x into out (n x n row-major, x restored); h relative. */
export function centralHessian(f: Objective, x: Float64Array, out: Float64Array, h = 1e-4): void {
  const n = x.length;
  const f0 = safeObjective(f, x);
  for (let i = 0; i < n; i++) {
    const xi = x[i];
    const hi = h * (1 + Math.abs(xi));
    x[i] = xi + hi;
    const fp = safeObjective(f, x);
    x[i] = xi - hi;
    const fm = safeObjective(f, x);
    x[i] = xi;
    out[i * n + i] = (fp - 2 * f0 + fm) / (hi * hi);
    for (let j = 0; j < i; j++) {
      const xj = x[j];
      const hj = h * (1 + Math.abs(xj));
      x[i] = xi + hi; x[j] = xj + hj;
      const fpp = safeObjective(f, x);
      x[j] = xj - hj;
      const fpm = safeObjective(f, x);
      x[i] = xi - hi;
      const fmm = safeObjective(f, x);
      x[j] = xj + hj;
      const fmp = safeObjective(f, x);
      x[i] = xi; x[j] = xj;
      out[i * n + j] = out[j * n + i] = (fpp - fpm - fmp + fmm) / (4 * hi * hj);
    }
  }
}
