/**
 * Unconstrained minimisation (MAP estimates in dosing, conditional modes in posthoc): BFGS with
 * central-difference gradients (./finiteDifferences.ts) and a backtracking Armijo line search (Nocedal & Wright, Numerical Optimization, 2nd ed. 2006,
 * algorithm 6.1, from memory), restarted from several points. A non-finite objective is treated
 * as +Infinity (the line search backs off), never an exception.
 */
import { centralGradient, safeObjective as safe, type Objective } from './finiteDifferences.js';

export type { Objective };

/** Central-difference gradient into g; returns the number of evaluations. */
function gradient(f: Objective, x: Float64Array, g: Float64Array, h: number): number {
  centralGradient(f, x, g, h);
  return 2 * x.length;
}

export interface MinimiseResult {
  x: Float64Array;
  fx: number;
  iterations: number;
  evaluations: number;
  converged: boolean;
}

export interface MinimiseOptions {
  maxIterations: number;
  /** Converged when every |gradient| < gradTol (1 + |f|). */
  gradTol: number;
  /** Finite-difference step. */
  h: number;
}

export const DEFAULT_MINIMISE: MinimiseOptions = { maxIterations: 300, gradTol: 1e-9, h: 1e-5 };

export function minimiseBfgs(f: Objective, x0: ArrayLike<number>, options: Partial<MinimiseOptions> = {}): MinimiseResult {
  const o = { ...DEFAULT_MINIMISE, ...options };
  const n = x0.length;
  const x = Float64Array.from(x0);
  const g = new Float64Array(n);
  const xNew = new Float64Array(n);
  const gNew = new Float64Array(n);
  const p = new Float64Array(n);
  const s = new Float64Array(n);
  const yv = new Float64Array(n);
  const Hy = new Float64Array(n);
  const Hinv = new Float64Array(n * n);
  const resetH = () => {
    Hinv.fill(0);
    for (let i = 0; i < n; i++) Hinv[i * n + i] = 1;
  };
  resetH();
  let fx = safe(f, x);
  let evals = 1;
  if (fx === Infinity) return { x, fx, iterations: 0, evaluations: evals, converged: false };
  evals += gradient(f, x, g, o.h);
  let converged = false;
  let it = 0;
  let stalls = 0;
  for (; it < o.maxIterations; it++) {
    let gmax = 0;
    for (let i = 0; i < n; i++) gmax = Math.max(gmax, Math.abs(g[i]));
    if (!Number.isFinite(gmax)) break;
    if (gmax < o.gradTol * (1 + Math.abs(fx))) {
      converged = true;
      break;
    }
    let slope = 0;
    for (let i = 0; i < n; i++) {
      let v = 0;
      for (let j = 0; j < n; j++) v -= Hinv[i * n + j] * g[j];
      p[i] = v;
      slope += v * g[i];
    }
    if (!(slope < 0)) {
      resetH();
      for (let i = 0; i < n; i++) p[i] = -g[i];
      slope = 0;
      for (let i = 0; i < n; i++) slope -= g[i] * g[i];
    }
    // Keep the first step within a unit box on the eta scale (SDs of about 0.1-1).
    let pmax = 0;
    for (let i = 0; i < n; i++) pmax = Math.max(pmax, Math.abs(p[i]));
    let alpha = pmax > 1 ? 1 / pmax : 1;
    let fNew = Infinity;
    for (let k = 0; k < 60; k++) {
      for (let i = 0; i < n; i++) xNew[i] = x[i] + alpha * p[i];
      fNew = safe(f, xNew);
      evals++;
      if (fNew <= fx + 1e-4 * alpha * slope) break;
      alpha *= 0.5;
    }
    if (!(fNew <= fx)) {
      // No decrease along p: restart from steepest descent once, then stop.
      if (++stalls > 2) break;
      resetH();
      continue;
    }
    evals += gradient(f, xNew, gNew, o.h);
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
    if (sy > 1e-12) {
      // BFGS update of the inverse Hessian.
      let yHy = 0;
      for (let i = 0; i < n; i++) {
        let v = 0;
        for (let j = 0; j < n; j++) v += Hinv[i * n + j] * yv[j];
        Hy[i] = v;
        yHy += yv[i] * v;
      }
      const r = 1 / sy;
      for (let i = 0; i < n; i++)
        for (let j = 0; j < n; j++) Hinv[i * n + j] += (1 + yHy * r) * r * s[i] * s[j] - r * (Hy[i] * s[j] + s[i] * Hy[j]);
    }
    if (improvement < 1e-14 * (1 + Math.abs(fx))) {
      if (++stalls > 2) {
        converged = true;
        break;
      }
    } else stalls = 0;
  }
  return { x, fx, iterations: it, evaluations: evals, converged };
}
