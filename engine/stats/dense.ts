/**
 * The few dense operations the statistical model and the estimator need, on row-major
 * Float64Arrays, allocation-free. Thin adapter: delegates to engine/linalg once it lands.
 */

/** Lower Cholesky factor of the symmetric n x n matrix a into out; false when not positive definite. */
export function choleskyLower(a: ArrayLike<number>, n: number, out: Float64Array): boolean {
  for (let i = 0; i < n * n; i++) out[i] = 0;
  for (let j = 0; j < n; j++) {
    let d = a[j * n + j];
    for (let k = 0; k < j; k++) d -= out[j * n + k] * out[j * n + k];
    if (!(d > 0) || !Number.isFinite(d)) return false;
    const l = Math.sqrt(d);
    out[j * n + j] = l;
    for (let i = j + 1; i < n; i++) {
      let s = a[i * n + j];
      for (let k = 0; k < j; k++) s -= out[i * n + k] * out[j * n + k];
      out[i * n + j] = s / l;
    }
  }
  return true;
}

/** Inverse of L L' from its lower factor L, into out (n x n). */
export function invertFromCholesky(l: ArrayLike<number>, n: number, out: Float64Array): void {
  // Column by column: solve L L' x = e_c.
  for (let c = 0; c < n; c++) {
    for (let i = 0; i < n; i++) {
      let s = i === c ? 1 : 0;
      for (let k = 0; k < i; k++) s -= l[i * n + k] * out[k * n + c];
      out[i * n + c] = s / l[i * n + i];
    }
    for (let i = n - 1; i >= 0; i--) {
      let s = out[i * n + c];
      for (let k = i + 1; k < n; k++) s -= l[k * n + i] * out[k * n + c];
      out[i * n + c] = s / l[i * n + i];
    }
  }
}

/** Solve (L L') x = b in place (b becomes x), L lower, n x n. */
export function solveWithCholesky(l: ArrayLike<number>, n: number, b: Float64Array): void {
  for (let i = 0; i < n; i++) {
    let s = b[i];
    for (let k = 0; k < i; k++) s -= l[i * n + k] * b[k];
    b[i] = s / l[i * n + i];
  }
  for (let i = n - 1; i >= 0; i--) {
    let s = b[i];
    for (let k = i + 1; k < n; k++) s -= l[k * n + i] * b[k];
    b[i] = s / l[i * n + i];
  }
}
