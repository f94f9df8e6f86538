/**
 * Small dense linear algebra on row-major Float64Arrays (n up to ~20): Cholesky, triangular
 * solves, SPD and general (LU, partial pivoting) inverses, log-determinants, products, and
 * symmetric eigenvalues by cyclic Jacobi rotations. Failure (not positive definite, singular,
 * no convergence) is a `false` return, never an exception, so callers in hot loops can treat it
 * as data. Outputs may alias inputs where noted. Methods: Golub & Van Loan, Matrix Computations,
 * 4th ed. (2013), sections 3.2 (LU), 4.2 (Cholesky), 8.5 (Jacobi).
 */

/** A[i][j] of a row-major n-column matrix. */
export const at = (a: Float64Array, n: number, i: number, j: number): number => a[i * n + j];

/** n x n identity, written into `out` (allocated when absent). */
export function identity(n: number, out: Float64Array = new Float64Array(n * n)): Float64Array {
  out.fill(0);
  for (let i = 0; i < n; i++) out[i * n + i] = 1;
  return out;
}

/**
 * Cholesky factor A = L L' of a symmetric positive-definite n x n matrix (only the lower
 * triangle of A is read). Writes L into `l` (upper triangle zeroed); `l` may be `a`.
 * Returns false when A is not numerically positive definite (a pivot <= 0 or not finite).
 */
export function cholesky(a: Float64Array, n: number, l: Float64Array): boolean {
  for (let j = 0; j < n; j++) {
    let d = a[j * n + j];
    for (let k = 0; k < j; k++) d -= l[j * n + k] * l[j * n + k];
    if (!(d > 0) || !Number.isFinite(d)) return false;
    const ljj = Math.sqrt(d);
    l[j * n + j] = ljj;
    for (let i = j + 1; i < n; i++) {
      let s = a[i * n + j];
      for (let k = 0; k < j; k++) s -= l[i * n + k] * l[j * n + k];
      l[i * n + j] = s / ljj;
    }
    for (let i = 0; i < j; i++) l[i * n + j] = 0;
  }
  return true;
}

/** Solve L x = b, L lower triangular; `x` may be `b`. */
export function solveLower(l: Float64Array, n: number, b: Float64Array, x: Float64Array): void {
  for (let i = 0; i < n; i++) {
    let s = b[i];
    for (let k = 0; k < i; k++) s -= l[i * n + k] * x[k];
    x[i] = s / l[i * n + i];
  }
}

/** Solve L' x = b with L lower triangular (the back substitution of a Cholesky solve); `x` may be `b`. */
export function solveLowerTransposed(l: Float64Array, n: number, b: Float64Array, x: Float64Array): void {
  for (let i = n - 1; i >= 0; i--) {
    let s = b[i];
    for (let k = i + 1; k < n; k++) s -= l[k * n + i] * x[k];
    x[i] = s / l[i * n + i];
  }
}

/** Solve U x = b, U upper triangular; `x` may be `b`. */
export function solveUpper(u: Float64Array, n: number, b: Float64Array, x: Float64Array): void {
  for (let i = n - 1; i >= 0; i--) {
    let s = b[i];
    for (let k = i + 1; k < n; k++) s -= u[i * n + k] * x[k];
    x[i] = s / u[i * n + i];
  }
}

/** Solve A x = b given A's Cholesky factor L; `x` may be `b`. */
export function choleskySolve(l: Float64Array, n: number, b: Float64Array, x: Float64Array): void {
  solveLower(l, n, b, x);
  solveLowerTransposed(l, n, x, x);
}

/**
 * Solve A x = b for SPD A. `work` (n*n) holds the factor; allocated when absent.
 * Returns false when A is not positive definite (x untouched).
 */
export function solveSpd(a: Float64Array, n: number, b: Float64Array, x: Float64Array, work: Float64Array = new Float64Array(n * n)): boolean {
  if (!cholesky(a, n, work)) return false;
  choleskySolve(work, n, b, x);
  return true;
}

/** log det A = 2 sum log L_ii from A's Cholesky factor. */
export function logDetFromCholesky(l: Float64Array, n: number): number {
  let s = 0;
  for (let i = 0; i < n; i++) s += Math.log(l[i * n + i]);
  return 2 * s;
}

/** A^{-1} from A's Cholesky factor L: (L L')^{-1} = L'^{-1} L^{-1}. `out` must not alias `l`. */
export function choleskyInverse(l: Float64Array, n: number, out: Float64Array): void {
  out.fill(0);
  for (let j = 0; j < n; j++) {
    out[j * n + j] = 1 / l[j * n + j];
    for (let i = j + 1; i < n; i++) {
      let s = 0;
      for (let k = j; k < i; k++) s -= l[i * n + k] * out[k * n + j];
      out[i * n + j] = s / l[i * n + i];
    }
  }
  for (let i = 0; i < n; i++) {
    for (let j = 0; j <= i; j++) {
      let s = 0;
      for (let k = i; k < n; k++) s += out[k * n + i] * out[k * n + j];
      // Reads only entries on or below the diagonal from rows >= i; the result goes above it.
      out[j * n + i] = s;
    }
  }
  for (let i = 0; i < n; i++) for (let j = 0; j < i; j++) out[i * n + j] = out[j * n + i];
}

/**
 * Inverse of an SPD matrix. `work` (n*n) is scratch; allocated when absent. `out` may be `a`.
 * Returns false when A is not positive definite.
 */
export function inverseSpd(a: Float64Array, n: number, out: Float64Array, work: Float64Array = new Float64Array(n * n)): boolean {
  if (!cholesky(a, n, work)) return false;
  choleskyInverse(work, n, out);
  return true;
}

/**
 * LU factorisation with partial pivoting, P A = L U, stored compactly in `lu` (unit L below the
 * diagonal, U on and above); `piv[i]` is the source row of row i. `lu` may be `a`.
 * Returns false when A is singular to working precision (a zero or non-finite pivot).
 */
export function luDecompose(a: Float64Array, n: number, lu: Float64Array, piv: Int32Array): boolean {
  if (lu !== a) lu.set(a.subarray(0, n * n));
  for (let i = 0; i < n; i++) piv[i] = i;
  for (let k = 0; k < n; k++) {
    let p = k;
    let max = Math.abs(lu[k * n + k]);
    for (let i = k + 1; i < n; i++) {
      const v = Math.abs(lu[i * n + k]);
      if (v > max) {
        max = v;
        p = i;
      }
    }
    if (!(max > 0) || !Number.isFinite(max)) return false;
    if (p !== k) {
      for (let j = 0; j < n; j++) {
        const t = lu[k * n + j];
        lu[k * n + j] = lu[p * n + j];
        lu[p * n + j] = t;
      }
      const t = piv[k];
      piv[k] = piv[p];
      piv[p] = t;
    }
    const d = lu[k * n + k];
    for (let i = k + 1; i < n; i++) {
      const f = (lu[i * n + k] /= d);
      if (f !== 0) for (let j = k + 1; j < n; j++) lu[i * n + j] -= f * lu[k * n + j];
    }
  }
  return true;
}

/** Solve A x = b from luDecompose's output. `x` must not alias `b`. */
export function luSolve(lu: Float64Array, n: number, piv: Int32Array, b: Float64Array, x: Float64Array): void {
  for (let i = 0; i < n; i++) {
    let s = b[piv[i]];
    for (let k = 0; k < i; k++) s -= lu[i * n + k] * x[k];
    x[i] = s;
  }
  solveUpper(lu, n, x, x);
}

/** log |det A| and the sign of det A from luDecompose's output. */
export function logAbsDetFromLu(lu: Float64Array, n: number, piv: Int32Array): { logAbsDet: number; sign: number } {
  let s = 0;
  let sign = 1;
  for (let i = 0; i < n; i++) {
    const d = lu[i * n + i];
    if (d < 0) sign = -sign;
    s += Math.log(Math.abs(d));
  }
  // Parity of the permutation by counting cycles.
  const seen = new Uint8Array(n);
  for (let i = 0; i < n; i++) {
    if (seen[i]) continue;
    let len = 0;
    for (let j = i; !seen[j]; j = piv[j]) {
      seen[j] = 1;
      len++;
    }
    if (len % 2 === 0) sign = -sign;
  }
  return { logAbsDet: s, sign };
}

/**
 * Inverse of a general square matrix by LU with partial pivoting. `out` must not alias `a`.
 * `work` (n*n + 2n) and `piv` (n) are scratch, allocated when absent.
 * Returns false when A is singular to working precision.
 */
export function inverse(
  a: Float64Array,
  n: number,
  out: Float64Array,
  work: Float64Array = new Float64Array(n * n + 2 * n),
  piv: Int32Array = new Int32Array(n),
): boolean {
  const lu = work.subarray(0, n * n);
  const col = work.subarray(n * n, n * n + n);
  const x = work.subarray(n * n + n, n * n + 2 * n);
  if (!luDecompose(a, n, lu, piv)) return false;
  for (let j = 0; j < n; j++) {
    col.fill(0);
    col[j] = 1;
    luSolve(lu, n, piv, col, x);
    for (let i = 0; i < n; i++) out[i * n + j] = x[i];
  }
  for (let i = 0; i < n * n; i++) if (!Number.isFinite(out[i])) return false;
  return true;
}

/** out (m x p) = A (m x k) B (k x p). `out` must not alias A or B. */
export function multiply(a: Float64Array, b: Float64Array, m: number, k: number, p: number, out: Float64Array): void {
  for (let i = 0; i < m; i++) {
    for (let j = 0; j < p; j++) {
      let s = 0;
      for (let r = 0; r < k; r++) s += a[i * k + r] * b[r * p + j];
      out[i * p + j] = s;
    }
  }
}

/** out (m x p) = A' B with A (k x m), B (k x p). `out` must not alias A or B. */
export function multiplyTransposeA(a: Float64Array, b: Float64Array, k: number, m: number, p: number, out: Float64Array): void {
  for (let i = 0; i < m; i++) {
    for (let j = 0; j < p; j++) {
      let s = 0;
      for (let r = 0; r < k; r++) s += a[r * m + i] * b[r * p + j];
      out[i * p + j] = s;
    }
  }
}

/** out (m x p) = A B' with A (m x k), B (p x k). `out` must not alias A or B. */
export function multiplyTransposeB(a: Float64Array, b: Float64Array, m: number, k: number, p: number, out: Float64Array): void {
  for (let i = 0; i < m; i++) {
    for (let j = 0; j < p; j++) {
      let s = 0;
      for (let r = 0; r < k; r++) s += a[i * k + r] * b[j * k + r];
      out[i * p + j] = s;
    }
  }
}

/** y (m) = A (m x k) x (k). `y` must not alias x. */
export function multiplyVector(a: Float64Array, m: number, k: number, x: Float64Array, y: Float64Array): void {
  for (let i = 0; i < m; i++) {
    let s = 0;
    for (let r = 0; r < k; r++) s += a[i * k + r] * x[r];
    y[i] = s;
  }
}

/** y = L z for lower-triangular L (e.g. a draw from N(0, L L') given z ~ N(0, I)); `y` may be `z`. */
export function multiplyLowerVector(l: Float64Array, n: number, z: Float64Array, y: Float64Array): void {
  for (let i = n - 1; i >= 0; i--) {
    let s = 0;
    for (let k = 0; k <= i; k++) s += l[i * n + k] * z[k];
    y[i] = s;
  }
}

/** x' A^{-1} x from A's Cholesky factor, using `work` (n). */
export function inverseQuadraticForm(l: Float64Array, n: number, x: Float64Array, work: Float64Array): number {
  solveLower(l, n, x, work);
  let s = 0;
  for (let i = 0; i < n; i++) s += work[i] * work[i];
  return s;
}

/** out = A' (n x m result from m x n A). `out` must not alias `a`. */
export function transpose(a: Float64Array, m: number, n: number, out: Float64Array): void {
  for (let i = 0; i < m; i++) for (let j = 0; j < n; j++) out[j * m + i] = a[i * n + j];
}

/**
 * Eigenvalues (ascending) and optionally eigenvectors (columns of `vectors`, row-major) of a
 * symmetric matrix by cyclic Jacobi rotations. Reads the whole of `a` (assumed symmetric) and
 * does not modify it. Returns false if it did not converge in 100 sweeps or met a non-finite entry.
 */
export function symmetricEigen(a: Float64Array, n: number, values: Float64Array, vectors?: Float64Array): boolean {
  const m = Float64Array.from(a.subarray(0, n * n));
  for (let i = 0; i < n * n; i++) if (!Number.isFinite(m[i])) return false;
  const v = vectors;
  if (v) identity(n, v);
  let converged = false;
  for (let sweep = 0; sweep < 100; sweep++) {
    let off = 0;
    let total = 0;
    for (let i = 0; i < n; i++) {
      for (let j = 0; j < n; j++) {
        const x = m[i * n + j] * m[i * n + j];
        total += x;
        if (i !== j) off += x;
      }
    }
    if (off <= 1e-30 * total || off === 0) {
      converged = true;
      break;
    }
    for (let p = 0; p < n - 1; p++) {
      for (let q = p + 1; q < n; q++) {
        const apq = m[p * n + q];
        if (apq === 0) continue;
        const app = m[p * n + p];
        const aqq = m[q * n + q];
        // Rotation angle from Golub & Van Loan Algorithm 8.5.1 (symmetric Schur decomposition).
        const tau = (aqq - app) / (2 * apq);
        const t = (tau >= 0 ? 1 : -1) / (Math.abs(tau) + Math.sqrt(1 + tau * tau));
        const c = 1 / Math.sqrt(1 + t * t);
        const s = t * c;
        for (let k = 0; k < n; k++) {
          const mkp = m[k * n + p];
          const mkq = m[k * n + q];
          m[k * n + p] = c * mkp - s * mkq;
          m[k * n + q] = s * mkp + c * mkq;
        }
        for (let k = 0; k < n; k++) {
          const mpk = m[p * n + k];
          const mqk = m[q * n + k];
          m[p * n + k] = c * mpk - s * mqk;
          m[q * n + k] = s * mpk + c * mqk;
        }
        if (v) {
          for (let k = 0; k < n; k++) {
            const vkp = v[k * n + p];
            const vkq = v[k * n + q];
            v[k * n + p] = c * vkp - s * vkq;
            v[k * n + q] = s * vkp + c * vkq;
          }
        }
      }
    }
  }
  // Sort ascending, permuting eigenvector columns alongside.
  const order = Array.from({ length: n }, (_, i) => i).sort((i, j) => m[i * n + i] - m[j * n + j]);
  for (let i = 0; i < n; i++) values[i] = m[order[i] * n + order[i]];
  if (v) {
    const copy = Float64Array.from(v.subarray(0, n * n));
    for (let k = 0; k < n; k++) for (let i = 0; i < n; i++) v[k * n + i] = copy[k * n + order[i]];
  }
  return converged;
}

/**
 * 2-norm condition number of a symmetric matrix, |lambda|max / |lambda|min; Infinity when
 * singular, NaN when the eigenvalues could not be computed.
 */
export function conditionNumberSymmetric(a: Float64Array, n: number): number {
  const values = new Float64Array(n);
  if (!symmetricEigen(a, n, values)) return NaN;
  let min = Infinity;
  let max = 0;
  for (let i = 0; i < n; i++) {
    const x = Math.abs(values[i]);
    if (x < min) min = x;
    if (x > max) max = x;
  }
  return min === 0 ? Infinity : max / min;
}
