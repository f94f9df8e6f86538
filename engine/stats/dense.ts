/**
 * The dense operations the statistical model and the estimator use, named for their callers;
 * each delegates to engine/linalg (row-major Float64Array, allocation-free).
 */
import { cholesky, choleskyInverse, choleskySolve } from '../linalg/index.js';

/** Lower Cholesky factor of the symmetric n x n matrix a into out; false when not positive definite. */
export function choleskyLower(a: Float64Array, n: number, out: Float64Array): boolean {
  return cholesky(a, n, out);
}

/** Inverse of L L' from its lower factor L, into out (n x n). */
export function invertFromCholesky(l: Float64Array, n: number, out: Float64Array): void {
  choleskyInverse(l, n, out);
}

/** Solve (L L') x = b in place (b becomes x), L lower, n x n. */
export function solveWithCholesky(l: Float64Array, n: number, b: Float64Array): void {
  choleskySolve(l, n, b, b);
}
