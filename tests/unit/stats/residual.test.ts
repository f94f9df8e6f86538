import { describe, expect, it } from 'vitest';
import { observationLogLik, residualSd } from '../../../engine/stats/residual.js';
import { logNormalCdf } from '../../../engine/stats/normalTail.js';

/** Composite Simpson rule on [lo, hi] with n (even) panels. */
function simpson(fn: (x: number) => number, lo: number, hi: number, n = 20000): number {
  const h = (hi - lo) / n;
  let s = fn(lo) + fn(hi);
  for (let i = 1; i < n; i++) s += (i % 2 ? 4 : 2) * fn(lo + i * h);
  return (s * h) / 3;
}

const phi = (x: number) => Math.exp(-0.5 * x * x) / Math.sqrt(2 * Math.PI);

describe('residualSd', () => {
  it('follows the four error models', () => {
    expect(residualSd('additive', 0.5, 0.2, 10)).toBe(0.5);
    expect(residualSd('proportional', 0.5, 0.2, -10)).toBeCloseTo(2, 15);
    expect(residualSd('combined', 0.3, 0.1, 4)).toBeCloseTo(0.5, 15);
    expect(residualSd('log-additive', 0.25, 0.2, 10)).toBe(0.25);
  });
});

describe('logNormalCdf', () => {
  it('matches the integral of the density across the range, tails included', () => {
    for (const z of [-30, -12, -8, -5, -3.5, -3, -2.9, -1, 0, 0.5, 2.9, 3.1, 6]) {
      // Independent check: integrate phi from z - 15 (or -40) to z.
      const lo = Math.min(z - 15, -40);
      const exact = simpson(phi, lo, z, 200000);
      if (z <= 0) expect(logNormalCdf(z)).toBeCloseTo(Math.log(exact), 7);
      else expect(Math.abs(logNormalCdf(z) - Math.log(exact))).toBeLessThan(1e-9);
    }
    expect(logNormalCdf(0)).toBeCloseTo(Math.log(0.5), 15);
    expect(logNormalCdf(-Infinity)).toBe(-Infinity);
    expect(logNormalCdf(Infinity)).toBe(0);
    expect(Number.isFinite(logNormalCdf(-200))).toBe(true);
  });
  it('is continuous at the method switch points', () => {
    for (const z of [-3, 3]) {
      expect(logNormalCdf(z - 1e-12)).toBeCloseTo(logNormalCdf(z + 1e-12), 10);
    }
  });
});

describe('observationLogLik', () => {
  it('is a normalised density for each error model (log-additive includes the Jacobian)', () => {
    const f = 3;
    for (const [model, a, b] of [
      ['additive', 0.4, 0],
      ['proportional', 0, 0.15],
      ['combined', 0.2, 0.1],
      ['log-additive', 0.3, 0],
    ] as const) {
      const lo = model === 'log-additive' ? 1e-6 : -10;
      const total = simpson((y) => Math.exp(observationLogLik(model, a, b, y, f, false, 0)), lo, 20, 40000);
      expect(total).toBeCloseTo(1, 6);
    }
  });
  it('gives log P(Y < LLOQ) for a censored level, equal to the integral of the density', () => {
    const f = 1.2;
    const lloq = 0.5;
    for (const [model, a, b] of [
      ['additive', 0.4, 0],
      ['combined', 0.2, 0.2],
      ['log-additive', 0.5, 0],
    ] as const) {
      const lo = model === 'log-additive' ? 1e-9 : -10;
      const mass = simpson((y) => Math.exp(observationLogLik(model, a, b, y, f, false, 0)), lo, lloq, 40000);
      expect(observationLogLik(model, a, b, lloq, f, true, lloq)).toBeCloseTo(Math.log(mass), 6);
    }
  });
  it('returns -Infinity, never NaN, for impossible values', () => {
    expect(observationLogLik('log-additive', 0.3, 0, 1, 0, false, 0)).toBe(-Infinity);
    expect(observationLogLik('log-additive', 0.3, 0, 1, -1, true, 0.5)).toBe(-Infinity);
    expect(observationLogLik('log-additive', 0.3, 0, -1, 1, false, 0)).toBe(-Infinity);
    expect(observationLogLik('proportional', 0, 0.1, 1, 0, false, 0)).toBe(-Infinity);
    expect(observationLogLik('additive', 0, 0, 1, 1, false, 0)).toBe(-Infinity);
    expect(observationLogLik('additive', 0.1, 0, 1, NaN, false, 0)).toBe(-Infinity);
    expect(observationLogLik('additive', NaN, 0, 1, 1, false, 0)).toBe(-Infinity);
    expect(observationLogLik('combined', 0.1, 0.1, 1, Infinity, true, 0.5)).toBe(-Infinity);
    // Far in the tail the censored term is finite and very negative, not -Infinity or NaN.
    const far = observationLogLik('additive', 0.1, 0, 0.1, 10, true, 0.1);
    expect(Number.isFinite(far)).toBe(true);
    expect(far).toBeLessThan(-4000);
  });
});

describe('combinedErrorDerivatives', () => {
  it('matches finite differences of observationLogLik in (log a, log b), censored or not', async () => {
    const { combinedErrorDerivatives } = await import('../../../engine/stats/residual.js');
    const out = new Float64Array(6);
    const ll = (u: number, v: number, y: number, f: number, c: boolean, lloq: number) => observationLogLik('combined', Math.exp(u), Math.exp(v), y, f, c, lloq);
    for (const [a, b, y, f, c, lloq] of [
      [0.3, 0.1, 2.5, 2, false, 0],
      [0.1, 0.2, 0.4, 3, false, 0],
      [0.2, 0.15, 0.5, 1.2, true, 0.5],
      [0.2, 0.15, 0.5, 4, true, 0.5],
    ] as const) {
      expect(combinedErrorDerivatives(a, b, y, f, c, lloq, out)).toBe(true);
      const u = Math.log(a), v = Math.log(b), h = 1e-4;
      expect(out[0]).toBeCloseTo(ll(u, v, y, f, c, lloq), 12);
      expect(out[1]).toBeCloseTo((ll(u + h, v, y, f, c, lloq) - ll(u - h, v, y, f, c, lloq)) / (2 * h), 6);
      expect(out[2]).toBeCloseTo((ll(u, v + h, y, f, c, lloq) - ll(u, v - h, y, f, c, lloq)) / (2 * h), 6);
      expect(out[3]).toBeCloseTo((ll(u + h, v, y, f, c, lloq) - 2 * out[0] + ll(u - h, v, y, f, c, lloq)) / (h * h), 4);
      expect(out[4]).toBeCloseTo((ll(u, v + h, y, f, c, lloq) - 2 * out[0] + ll(u, v - h, y, f, c, lloq)) / (h * h), 4);
      const cross = (ll(u + h, v + h, y, f, c, lloq) - ll(u + h, v - h, y, f, c, lloq) - ll(u - h, v + h, y, f, c, lloq) + ll(u - h, v - h, y, f, c, lloq)) / (4 * h * h);
      expect(out[5]).toBeCloseTo(cross, 4);
    }
  });
});
