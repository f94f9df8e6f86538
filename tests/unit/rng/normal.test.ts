import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { logNormalCdf, normalCdf, normalPdf, normalQuantile, normalSurvival } from '../../../engine/rng/index.js';

// Reference values: tests/reference/normal/normal.json, made by make_normal_reference.py beside it
// with mpmath at 60 significant digits (correctly rounded for each double input).
const ref = JSON.parse(readFileSync(new URL('../../reference/normal/normal.json', import.meta.url), 'utf8')) as {
  cdf: { x: number; cdf: number; logCdf: number }[];
  quantile: { p: number; x: number }[];
};

const relErr = (a: number, b: number) => (b === 0 ? Math.abs(a) : Math.abs(a - b) / Math.abs(b));

describe('normalCdf and logNormalCdf against mpmath (tests/reference/normal)', () => {
  it.each(ref.cdf.map((r) => [r.x, r]))('x = %d', (_x, r) => {
    if (r.cdf > 1e-300) expect(relErr(normalCdf(r.x), r.cdf)).toBeLessThan(2e-15);
    else if (r.cdf < 1e-307) expect(normalCdf(r.x)).toBeLessThan(1e-300);
    expect(relErr(logNormalCdf(r.x), r.logCdf)).toBeLessThan(r.x > 0.5 ? 1e-14 : 2e-15);
  });

  it('upper tail and symmetry', () => {
    // Phi(-x) = 1 - Phi(x) (exact identity); survival in the far upper tail equals the lower tail.
    expect(normalSurvival(10)).toBe(normalCdf(-10));
    for (const x of [0.1, 0.7, 1.3, 2.9, 5]) expect(normalCdf(x) + normalCdf(-x)).toBeCloseTo(1, 15);
    expect(normalCdf(-Infinity)).toBe(0);
    expect(normalCdf(Infinity)).toBe(1);
    expect(logNormalCdf(-Infinity)).toBe(-Infinity);
    expect(Number.isNaN(normalCdf(NaN))).toBe(true);
  });

  it('log-CDF is continuous across its internal switch at x = -30', () => {
    const a = logNormalCdf(-30 + 1e-12);
    const b = logNormalCdf(-30 - 1e-12);
    expect(Math.abs(a - b)).toBeLessThan(1e-9);
  });

  it('density: phi(0) = 1/sqrt(2 pi) (exact constant)', () => {
    expect(normalPdf(0)).toBeCloseTo(1 / Math.sqrt(2 * Math.PI), 16);
  });
});

describe('normalQuantile against mpmath (tests/reference/normal)', () => {
  it.each(ref.quantile.map((r) => [r.p, r]))('p = %d', (_p, r) => {
    // Within 2 ulp of the correctly rounded quantile of the exact double p, in both tails.
    if (r.x === 0) expect(normalQuantile(r.p)).toBe(0);
    else expect(relErr(normalQuantile(r.p), r.x)).toBeLessThan(4.5e-16);
  });

  it('round-trips through the CDF in the lower tail', () => {
    // Phi's condition number near x is |x| phi(x) / Phi(x) ~ x^2, so an x exact to 1 ulp moves Phi by ~x^2 ulp.
    for (const p of [1e-280, 3e-150, 7e-40, 2e-9, 0.0123, 0.3]) {
      const x = normalQuantile(p);
      expect(relErr(normalCdf(x), p)).toBeLessThan(1e-15 + 4.5e-16 * x * x);
    }
  });

  it('edges', () => {
    expect(normalQuantile(0)).toBe(-Infinity);
    expect(normalQuantile(1)).toBe(Infinity);
    expect(Number.isNaN(normalQuantile(-0.1))).toBe(true);
    expect(Number.isNaN(normalQuantile(1.1))).toBe(true);
    expect(Number.isNaN(normalQuantile(NaN))).toBe(true);
    expect(normalQuantile(0.5)).toBe(0);
  });
});
