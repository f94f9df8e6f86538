/**
 * Distribution functions and the Shapiro-Wilk test of engine/posthoc against scipy
 * (tests/reference/posthoc/make_distributions_reference.py -> distributions.json).
 */
import { readFileSync } from 'node:fs';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import { chiSquareCdf, incompleteBeta, logGamma, quantileSorted, studentTCdf } from '../../../engine/posthoc/distributions.js';
import { npdeTests, shapiroWilk } from '../../../engine/posthoc/normality.js';
import { createStreams } from '../../../engine/rng/index.js';

const ref = JSON.parse(readFileSync(path.resolve(__dirname, '../../reference/posthoc/distributions.json'), 'utf8'));

describe('distribution functions (scipy, distributions.json)', () => {
  it('log-gamma matches scipy.special.gammaln', () => {
    for (const r of ref.gammaln) expect(Math.abs(logGamma(r.x) - r.value)).toBeLessThan(1e-12 * Math.max(1, Math.abs(r.value)));
  });
  it('regularised incomplete beta matches scipy.special.betainc', () => {
    for (const r of ref.betainc) expect(Math.abs(incompleteBeta(r.x, r.a, r.b) - r.value)).toBeLessThan(1e-12);
  });
  it('Student t CDF matches scipy.stats.t.cdf', () => {
    for (const r of ref.tCdf) expect(Math.abs(studentTCdf(r.t, r.df) - r.cdf)).toBeLessThan(1e-12);
  });
  it('chi-square CDF matches scipy.stats.chi2.cdf', () => {
    for (const r of ref.chi2Cdf) expect(Math.abs(chiSquareCdf(r.x, r.df) - r.cdf)).toBeLessThan(1e-12);
  });
  it('t with 1 df is the Cauchy distribution (exact identity)', () => {
    for (const t of [-4, -0.3, 0.9, 12]) expect(studentTCdf(t, 1)).toBeCloseTo(0.5 + Math.atan(t) / Math.PI, 13);
  });
  it('quantiles interpolate between order statistics (type 7)', () => {
    const x = Float64Array.from([1, 2, 4, 8]);
    expect(quantileSorted(x, 4, 0)).toBe(1);
    expect(quantileSorted(x, 4, 0.5)).toBe(3);
    expect(quantileSorted(x, 4, 1)).toBe(8);
  });
});

describe('Shapiro-Wilk, Royston 1995 (scipy.stats.shapiro, distributions.json)', () => {
  it('W and p agree with scipy (its W is computed in single precision)', () => {
    for (const s of ref.shapiro) {
      const r = shapiroWilk(s.values);
      expect(Math.abs(r.statistic - s.W), `n = ${s.n}`).toBeLessThan(5e-6);
      // Near W = 1 the p-value is steep in W, so scipy's single-precision W moves it in the third decimal.
      expect(Math.abs(r.pValue - s.pValue), `n = ${s.n}`).toBeLessThan(2e-3);
      if (s.pValue < 1e-6) expect(Math.abs(Math.log(r.pValue / s.pValue)), `n = ${s.n}`).toBeLessThan(0.5);
    }
  });
});

describe('NPDE summary tests (Comets, Brendel & Mentre 2008)', () => {
  it('reject at about 5 % under the null and reliably under shift, scale and skew (simulated, labelled)', () => {
    const reject = [0, 0, 0, 0];
    const R = 200;
    for (let r = 0; r < R; r++) {
      const rng = createStreams(r).stream('test', 'npde');
      const t = npdeTests(Float64Array.from({ length: 100 }, () => rng.normal()));
      [t.meanTest.pValue, t.varianceTest.pValue, t.normalityTest.pValue, t.globalTest.pValue].forEach((p, k) => (reject[k] += p < 0.05 ? 1 : 0));
    }
    // Binomial(200, 0.05): 10 expected, 2-20 is far beyond 3 SD either side (common practice).
    for (const c of reject) expect(c).toBeGreaterThanOrEqual(2), expect(c).toBeLessThanOrEqual(20);
    const rng = createStreams(7).stream('test', 'npde');
    const z = Float64Array.from({ length: 400 }, () => rng.normal());
    expect(npdeTests(z.map((v) => v + 0.3)).meanTest.pValue).toBeLessThan(0.01);
    expect(npdeTests(z.map((v) => 1.3 * v)).varianceTest.pValue).toBeLessThan(0.01);
    expect(npdeTests(z.map((v) => Math.exp(v))).normalityTest.pValue).toBeLessThan(0.01);
  });
});
