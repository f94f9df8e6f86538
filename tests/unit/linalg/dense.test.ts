import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import {
  cholesky,
  choleskyInverse,
  choleskySolve,
  conditionNumberSymmetric,
  identity,
  inverse,
  inverseQuadraticForm,
  inverseSpd,
  logAbsDetFromLu,
  logDetFromCholesky,
  luDecompose,
  luSolve,
  multiply,
  multiplyLowerVector,
  multiplyTransposeA,
  multiplyTransposeB,
  multiplyVector,
  solveLower,
  solveLowerTransposed,
  solveSpd,
  solveUpper,
  symmetricEigen,
  transpose,
} from '../../../engine/linalg/index.js';

// Reference values: tests/reference/linalg/linalg.json, made by make_linalg_reference.py beside
// it with numpy/scipy (LAPACK); the Hilbert inverses there are exact integers (fractions).
const ref = JSON.parse(readFileSync(new URL('../../reference/linalg/linalg.json', import.meta.url), 'utf8')) as {
  spd: { n: number; a: number[]; cholesky: number[]; inverse: number[]; logDet: number; eigenvalues: number[]; b: number[]; solution: number[] }[];
  general: { n: number; a: number[]; inverse: number[]; logAbsDet: number; sign: number }[];
  hilbert: { n: number; a: number[]; inverseExact: number[]; eigenvalues: number[] }[];
};

const f64 = (x: number[]) => Float64Array.from(x);
function maxRelDiff(a: ArrayLike<number>, b: ArrayLike<number>): number {
  let scale = 0;
  for (let i = 0; i < b.length; i++) scale = Math.max(scale, Math.abs(b[i]));
  let d = 0;
  for (let i = 0; i < b.length; i++) d = Math.max(d, Math.abs(a[i] - b[i]));
  return d / scale;
}

describe('cholesky: hand-worked example', () => {
  // A = [[4,12,-16],[12,37,-43],[-16,-43,98]] has L = [[2,0,0],[6,1,0],[-8,5,3]] exactly
  // (worked by hand: 2*2=4, 6*2=12, 6*6+1=37, -8*2=-16, -8*6+5=-43, 64+25+9=98).
  const a = f64([4, 12, -16, 12, 37, -43, -16, -43, 98]);
  it('factor, log-determinant, solve, inverse', () => {
    const l = new Float64Array(9);
    expect(cholesky(a, 3, l)).toBe(true);
    expect([...l]).toEqual([2, 0, 0, 6, 1, 0, -8, 5, 3]);
    expect(logDetFromCholesky(l, 3)).toBeCloseTo(Math.log(36), 13); // det = (2*1*3)^2 = 36
    const x = new Float64Array(3);
    choleskySolve(l, 3, f64([1, 2, 3]), x);
    const ax = new Float64Array(3);
    multiplyVector(a, 3, 3, x, ax);
    expect(maxRelDiff(ax, [1, 2, 3])).toBeLessThan(1e-13);
    const inv = new Float64Array(9);
    choleskyInverse(l, 3, inv);
    const prod = new Float64Array(9);
    multiply(a, inv, 3, 3, 3, prod);
    expect(maxRelDiff(prod, identity(3))).toBeLessThan(1e-12);
  });
  it('in place (l === a) gives the same factor', () => {
    const b = Float64Array.from(a);
    expect(cholesky(b, 3, b)).toBe(true);
    expect([...b]).toEqual([2, 0, 0, 6, 1, 0, -8, 5, 3]);
  });
  it('returns false, never throws, on indefinite, singular or NaN input', () => {
    const l = new Float64Array(4);
    expect(cholesky(f64([1, 2, 2, 1]), 2, l)).toBe(false); // eigenvalues 3 and -1
    expect(cholesky(f64([1, 1, 1, 1]), 2, l)).toBe(false); // singular
    expect(cholesky(f64([1, 0, 0, NaN]), 2, l)).toBe(false);
    expect(solveSpd(f64([1, 2, 2, 1]), 2, f64([1, 1]), new Float64Array(2))).toBe(false);
    expect(inverseSpd(f64([-1, 0, 0, 1]), 2, new Float64Array(4))).toBe(false);
  });
});

describe('SPD matrices against numpy (tests/reference/linalg)', () => {
  it.each(ref.spd.map((r) => [r.n, r]))('n = %d', (n, r) => {
    const a = f64(r.a);
    const l = new Float64Array(n * n);
    expect(cholesky(a, n, l)).toBe(true);
    expect(maxRelDiff(l, r.cholesky)).toBeLessThan(1e-14);
    expect(Math.abs(logDetFromCholesky(l, n) - r.logDet)).toBeLessThan(1e-13 * Math.max(1, Math.abs(r.logDet)));
    const inv = new Float64Array(n * n);
    expect(inverseSpd(a, n, inv)).toBe(true);
    expect(maxRelDiff(inv, r.inverse)).toBeLessThan(1e-13);
    const x = new Float64Array(n);
    expect(solveSpd(a, n, f64(r.b), x)).toBe(true);
    expect(maxRelDiff(x, r.solution)).toBeLessThan(1e-13);
    const values = new Float64Array(n);
    expect(symmetricEigen(a, n, values)).toBe(true);
    expect(maxRelDiff(values, r.eigenvalues)).toBeLessThan(1e-13);
    // x' A^-1 x = x' (A^-1 x)
    const ainvb = new Float64Array(n);
    multiplyVector(inv, n, n, f64(r.b), ainvb);
    const direct = r.b.reduce((s, bi, i) => s + bi * ainvb[i], 0);
    expect(inverseQuadraticForm(l, n, f64(r.b), new Float64Array(n))).toBeCloseTo(direct, 12);
  });

  it('inverseSpd may overwrite its input', () => {
    const r = ref.spd[2];
    const a = f64(r.a);
    expect(inverseSpd(a, r.n, a)).toBe(true);
    expect(maxRelDiff(a, r.inverse)).toBeLessThan(1e-13);
  });
});

describe('general matrices against numpy (tests/reference/linalg)', () => {
  it.each(ref.general.map((r) => [r.n, r]))('n = %d', (n, r) => {
    const a = f64(r.a);
    const inv = new Float64Array(n * n);
    expect(inverse(a, n, inv)).toBe(true);
    expect(maxRelDiff(inv, r.inverse)).toBeLessThan(1e-12);
    const lu = new Float64Array(n * n);
    const piv = new Int32Array(n);
    expect(luDecompose(a, n, lu, piv)).toBe(true);
    const det = logAbsDetFromLu(lu, n, piv);
    expect(det.sign).toBe(r.sign);
    expect(det.logAbsDet).toBeCloseTo(r.logAbsDet, 12);
    const b = f64(Array.from({ length: n }, (_, i) => i + 1));
    const x = new Float64Array(n);
    luSolve(lu, n, piv, b, x);
    const ax = new Float64Array(n);
    multiplyVector(a, n, n, x, ax);
    expect(maxRelDiff(ax, b)).toBeLessThan(1e-12);
  });

  it('a matrix that needs pivoting (zero leading entry)', () => {
    const a = f64([0, 1, 1, 0]);
    const inv = new Float64Array(4);
    expect(inverse(a, 2, inv)).toBe(true);
    expect([...inv]).toEqual([0, 1, 1, 0]);
    const lu = new Float64Array(4);
    const piv = new Int32Array(2);
    luDecompose(a, 2, lu, piv);
    expect(logAbsDetFromLu(lu, 2, piv).sign).toBe(-1); // det = -1
  });

  it('singular matrices return false', () => {
    expect(inverse(f64([1, 2, 2, 4]), 2, new Float64Array(4))).toBe(false);
    expect(inverse(f64([0, 0, 0, 0]), 2, new Float64Array(4))).toBe(false);
  });
});

describe('Hilbert matrices: exact inverses (tests/reference/linalg, fractions)', () => {
  it.each(ref.hilbert.map((r) => [r.n, r]))('n = %d', (n, r) => {
    const a = f64(r.a);
    const inv = new Float64Array(n * n);
    expect(inverseSpd(a, n, inv)).toBe(true);
    // Hilbert matrices are ill conditioned (cond ~ 1.5e4 for n=4, 1.5e7 for 6, 1.5e10 for 8):
    // the attainable relative accuracy is about cond * 1e-16.
    const cond = conditionNumberSymmetric(a, n);
    const condRef = r.eigenvalues[n - 1] / r.eigenvalues[0];
    expect(Math.abs(cond - condRef) / condRef).toBeLessThan(1e-6);
    expect(maxRelDiff(inv, r.inverseExact)).toBeLessThan(cond * 1e-15);
    const general = new Float64Array(n * n);
    expect(inverse(a, n, general)).toBe(true);
    expect(maxRelDiff(general, r.inverseExact)).toBeLessThan(cond * 1e-15);
  });
});

describe('eigenvectors, triangular solves and products', () => {
  it('A v = lambda v for each eigenpair', () => {
    const r = ref.spd[3];
    const n = r.n;
    const a = f64(r.a);
    const values = new Float64Array(n);
    const vectors = new Float64Array(n * n);
    expect(symmetricEigen(a, n, values, vectors)).toBe(true);
    const v = new Float64Array(n);
    const av = new Float64Array(n);
    for (let j = 0; j < n; j++) {
      for (let i = 0; i < n; i++) v[i] = vectors[i * n + j];
      multiplyVector(a, n, n, v, av);
      for (let i = 0; i < n; i++) expect(av[i]).toBeCloseTo(values[j] * v[i], 11);
    }
    expect(conditionNumberSymmetric(f64([1, 0, 0, 0]), 2)).toBe(Infinity);
    expect(Number.isNaN(conditionNumberSymmetric(f64([1, NaN, NaN, 1]), 2))).toBe(true);
  });

  it('triangular solves and products are consistent', () => {
    const l = f64([2, 0, 0, 6, 1, 0, -8, 5, 3]);
    const b = f64([1, -2, 0.5]);
    const x = new Float64Array(3);
    solveLower(l, 3, b, x);
    const lx = new Float64Array(3);
    multiplyLowerVector(l, 3, x, lx);
    expect(maxRelDiff(lx, b)).toBeLessThan(1e-15);
    const lt = new Float64Array(9);
    transpose(l, 3, 3, lt);
    solveLowerTransposed(l, 3, b, x);
    const y = new Float64Array(3);
    solveUpper(lt, 3, b, y);
    expect(maxRelDiff(x, y)).toBeLessThan(1e-15);
    const llt = new Float64Array(9);
    multiplyTransposeB(l, l, 3, 3, 3, llt);
    expect([...llt]).toEqual([4, 12, -16, 12, 37, -43, -16, -43, 98]);
    const ltl = new Float64Array(9);
    multiplyTransposeA(l, l, 3, 3, 3, ltl);
    const ltl2 = new Float64Array(9);
    multiply(lt, l, 3, 3, 3, ltl2);
    expect([...ltl]).toEqual([...ltl2]);
    // Rectangular: (2x3)(3x1)
    const out = new Float64Array(2);
    multiply(f64([1, 2, 3, 4, 5, 6]), f64([1, 0, -1]), 2, 3, 1, out);
    expect([...out]).toEqual([-2, -2]);
  });
});
