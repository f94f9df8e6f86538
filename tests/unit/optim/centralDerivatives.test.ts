/**
 * engine/optim centralDerivatives: gradient and Hessian from one shared stencil, against the
 * analytic derivatives of a smooth test function (calculus; common practice) and the
 * stencil's O(h^2) error, plus its evaluation count and non-finite handling.
 */
import { describe, expect, it } from 'vitest';
import { centralDerivatives } from '../../../engine/optim/finiteDifferences.js';

// f(x, y, z) = exp(x) y^2 + sin(y z) + x z^3
const f = (v: Float64Array) => Math.exp(v[0]) * v[1] ** 2 + Math.sin(v[1] * v[2]) + v[0] * v[2] ** 3;
function analytic(x: number, y: number, z: number) {
  const g = [Math.exp(x) * y * y + z ** 3, 2 * Math.exp(x) * y + z * Math.cos(y * z), y * Math.cos(y * z) + 3 * x * z * z];
  const hxx = Math.exp(x) * y * y;
  const hxy = 2 * Math.exp(x) * y;
  const hxz = 3 * z * z;
  const hyy = 2 * Math.exp(x) - z * z * Math.sin(y * z);
  const hyz = Math.cos(y * z) - y * z * Math.sin(y * z);
  const hzz = -y * y * Math.sin(y * z) + 6 * x * z;
  return { g, H: [hxx, hxy, hxz, hxy, hyy, hyz, hxz, hyz, hzz] };
}

describe('centralDerivatives (engine/optim)', () => {
  it('matches the analytic gradient and Hessian to O(h^2), using 1 + 2n + 2n(n-1) evaluations', () => {
    const x = Float64Array.of(0.3, -1.2, 0.7);
    const g = new Float64Array(3);
    const H = new Float64Array(9);
    let calls = 0;
    const f0 = centralDerivatives((v) => (calls++, f(v)), x, g, H, new Float64Array(3), (xi) => 1e-4 * Math.max(1, Math.abs(xi)));
    const ref = analytic(0.3, -1.2, 0.7);
    expect(f0).toBe(f(x));
    expect(calls).toBe(1 + 2 * 3 + 2 * 3 * 2);
    for (let i = 0; i < 3; i++) expect(g[i]).toBeCloseTo(ref.g[i], 7);
    for (let q = 0; q < 9; q++) expect(H[q]).toBeCloseTo(ref.H[q], 5);
    expect(Array.from(x)).toEqual([0.3, -1.2, 0.7]);
  });
  it('returns a non-finite centre value without evaluating the stencil, and reports non-finite derivatives where a side is impossible', () => {
    const g = new Float64Array(1);
    const H = new Float64Array(1);
    let calls = 0;
    expect(centralDerivatives(() => (calls++, NaN), Float64Array.of(1), g, H, new Float64Array(1), () => 0.1)).toBeNaN();
    expect(calls).toBe(1);
    centralDerivatives((v) => (v[0] > 1.05 ? -Infinity : -v[0] * v[0]), Float64Array.of(1), g, H, new Float64Array(1), () => 0.1);
    expect(Number.isFinite(g[0])).toBe(false);
    expect(Number.isFinite(H[0])).toBe(false);
  });
});
