/**
 * Small unconstrained minimiser for the conditional modes: BFGS on the inverse Hessian with
 * central-difference gradients and a backtracking Armijo line search (Nocedal & Wright,
 * Numerical Optimization, 2nd ed. 2006, algorithm 6.1, from memory). A non-finite objective is
 * +Infinity (the line search backs off), never an exception. Buffers are allocated once per
 * `createBfgs(n)` and reused for every subject.
 */

export type Objective = (x: Float64Array) => number;

export interface MinimiseOutcome {
  /** Minimum value found (+Infinity when the start was not finite). */
  fx: number;
  iterations: number;
  evaluations: number;
  /** Gradient small or no further decrease possible. */
  converged: boolean;
}

export interface BfgsOptions {
  maxIterations: number;
  /** Converged when max |gradient| < gradTol (1 + |f|). */
  gradTol: number;
  /** Relative finite-difference step. */
  h: number;
  /** Largest step (max norm) of the first trial of each line search. */
  maxStep: number;
}

export const DEFAULT_BFGS: Readonly<BfgsOptions> = Object.freeze({ maxIterations: 200, gradTol: 1e-7, h: 1e-5, maxStep: 1 });

export interface Bfgs {
  /** Minimise f from x (overwritten with the minimiser). */
  minimise(f: Objective, x: Float64Array, options?: Partial<BfgsOptions>): MinimiseOutcome;
}

function safe(f: Objective, x: Float64Array): number {
  const v = f(x);
  return v === v && v !== -Infinity ? v : Infinity;
}

/** Central-difference gradient of f at x into g (x restored); NaN where a side is not finite. */
export function centralGradient(f: Objective, x: Float64Array, g: Float64Array, h: number): void {
  for (let i = 0; i < x.length; i++) {
    const xi = x[i];
    const step = h * (1 + Math.abs(xi));
    x[i] = xi + step;
    const fp = safe(f, x);
    x[i] = xi - step;
    const fm = safe(f, x);
    x[i] = xi;
    g[i] = fp === Infinity || fm === Infinity ? NaN : (fp - fm) / (2 * step);
  }
}

/** Central-difference Hessian of f at x into out (n x n row-major, x restored); h relative. */
export function centralHessian(f: Objective, x: Float64Array, out: Float64Array, h = 1e-4): void {
  const n = x.length;
  const f0 = safe(f, x);
  for (let i = 0; i < n; i++) {
    const xi = x[i];
    const hi = h * (1 + Math.abs(xi));
    x[i] = xi + hi;
    const fp = safe(f, x);
    x[i] = xi - hi;
    const fm = safe(f, x);
    x[i] = xi;
    out[i * n + i] = (fp - 2 * f0 + fm) / (hi * hi);
    for (let j = 0; j < i; j++) {
      const xj = x[j];
      const hj = h * (1 + Math.abs(xj));
      x[i] = xi + hi; x[j] = xj + hj;
      const fpp = safe(f, x);
      x[j] = xj - hj;
      const fpm = safe(f, x);
      x[i] = xi - hi;
      const fmm = safe(f, x);
      x[j] = xj + hj;
      const fmp = safe(f, x);
      x[i] = xi; x[j] = xj;
      out[i * n + j] = out[j * n + i] = (fpp - fpm - fmp + fmm) / (4 * hi * hj);
    }
  }
}

export function createBfgs(n: number): Bfgs {
  const g = new Float64Array(n);
  const xNew = new Float64Array(n);
  const gNew = new Float64Array(n);
  const p = new Float64Array(n);
  const s = new Float64Array(n);
  const yv = new Float64Array(n);
  const hy = new Float64Array(n);
  const hInv = new Float64Array(n * n);
  const resetH = () => {
    hInv.fill(0);
    for (let i = 0; i < n; i++) hInv[i * n + i] = 1;
  };
  return {
    minimise(f, x, options = {}) {
      const o = { ...DEFAULT_BFGS, ...options };
      resetH();
      let fx = safe(f, x);
      let evals = 1;
      if (fx === Infinity) return { fx, iterations: 0, evaluations: evals, converged: false };
      centralGradient(f, x, g, o.h);
      evals += 2 * n;
      let converged = false;
      let stalls = 0;
      let it = 0;
      for (; it < o.maxIterations; it++) {
        let gmax = 0;
        for (let i = 0; i < n; i++) gmax = Math.max(gmax, Math.abs(g[i]));
        if (!(gmax === gmax)) break;
        if (gmax < o.gradTol * (1 + Math.abs(fx))) {
          converged = true;
          break;
        }
        let slope = 0;
        for (let i = 0; i < n; i++) {
          let v = 0;
          for (let j = 0; j < n; j++) v -= hInv[i * n + j] * g[j];
          p[i] = v;
          slope += v * g[i];
        }
        if (!(slope < 0)) {
          resetH();
          slope = 0;
          for (let i = 0; i < n; i++) (p[i] = -g[i]), (slope -= g[i] * g[i]);
        }
        let pmax = 0;
        for (let i = 0; i < n; i++) pmax = Math.max(pmax, Math.abs(p[i]));
        let alpha = pmax > o.maxStep ? o.maxStep / pmax : 1;
        let fNew = Infinity;
        for (let k = 0; k < 50; k++) {
          for (let i = 0; i < n; i++) xNew[i] = x[i] + alpha * p[i];
          fNew = safe(f, xNew);
          evals++;
          if (fNew <= fx + 1e-4 * alpha * slope) break;
          alpha *= 0.5;
        }
        if (!(fNew <= fx)) {
          if (++stalls > 2) {
            converged = gmax < 1e-3 * (1 + Math.abs(fx));
            break;
          }
          resetH();
          continue;
        }
        centralGradient(f, xNew, gNew, o.h);
        evals += 2 * n;
        let sy = 0;
        for (let i = 0; i < n; i++) {
          s[i] = xNew[i] - x[i];
          yv[i] = gNew[i] - g[i];
          sy += s[i] * yv[i];
        }
        const improvement = fx - fNew;
        fx = fNew;
        x.set(xNew);
        g.set(gNew);
        if (sy > 1e-14) {
          let yHy = 0;
          for (let i = 0; i < n; i++) {
            let v = 0;
            for (let j = 0; j < n; j++) v += hInv[i * n + j] * yv[j];
            hy[i] = v;
            yHy += yv[i] * v;
          }
          const r = 1 / sy;
          for (let i = 0; i < n; i++)
            for (let j = 0; j < n; j++) hInv[i * n + j] += (1 + yHy * r) * r * s[i] * s[j] - r * (hy[i] * s[j] + s[i] * hy[j]);
        }
        if (improvement < 1e-13 * (1 + Math.abs(fx))) {
          if (++stalls > 2) {
            converged = true;
            break;
          }
        } else stalls = 0;
      }
      return { fx, iterations: it, evaluations: evals, converged };
    },
  };
}
