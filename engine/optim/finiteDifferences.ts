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

/**
 * Gradient and Hessian of f at x together from one stencil (the centre, x +- h_i e_i, and the four
 * corners x +- h_i e_i +- h_j e_j for i < j): 1 + 2n + 2n(n - 1) evaluations, the gradient
 * sharing the diagonal's points. `stepOf(xi)` gives the absolute step of a component. Returns
 * f(x); derivatives are NaN or infinite where the stencil met a non-finite value (the caller
 * checks). `scratch` (length n) holds the shifted points; x is not modified.
 */
export function centralDerivatives(
  f: Objective,
  x: Float64Array,
  gradient: Float64Array,
  hessian: Float64Array,
  scratch: Float64Array,
  stepOf: (xi: number) => number,
): number {
  const n = x.length;
  const f0 = f(x);
  if (!Number.isFinite(f0)) return f0;
  for (let m = 0; m < n; m++) {
    const h = stepOf(x[m]);
    scratch.set(x);
    scratch[m] = x[m] + h;
    const fp = f(scratch);
    scratch[m] = x[m] - h;
    const fm = f(scratch);
    gradient[m] = (fp - fm) / (2 * h);
    hessian[m * n + m] = (fp - 2 * f0 + fm) / (h * h);
  }
  for (let m = 0; m < n; m++)
    for (let m2 = m + 1; m2 < n; m2++) {
      const h1 = stepOf(x[m]);
      const h2 = stepOf(x[m2]);
      // Corners (+,+), (+,-), (-,+), (-,-) with weights +1, -1, -1, +1.
      let sum = 0;
      for (let corner = 0; corner < 4; corner++) {
        const s1 = corner < 2 ? 1 : -1;
        const s2 = corner % 2 === 0 ? 1 : -1;
        scratch.set(x);
        scratch[m] += s1 * h1;
        scratch[m2] += s2 * h2;
        sum += s1 * s2 * f(scratch);
      }
      hessian[m * n + m2] = hessian[m2 * n + m] = sum / (4 * h1 * h2);
    }
  return f0;
}
