/** The minimiser and finite differences live in engine/optim; kept here for the dosing imports. */
import { centralHessian, type Objective } from '../optim/finiteDifferences.js';

export { minimiseBfgs, DEFAULT_MINIMISE, type MinimiseOptions, type MinimiseResult } from '../optim/bfgs.js';
export { centralGradient as gradient } from '../optim/finiteDifferences.js';
export type { Objective };

/** Central-difference Hessian (n x n, row-major) of f at x, newly allocated (x restored). */
export function hessian(f: Objective, x: Float64Array, h = 1e-4): Float64Array {
  const H = new Float64Array(x.length * x.length);
  centralHessian(f, x, H, h);
  return H;
}
