/**
 * Tests of the NPDE distribution (Comets, Brendel & Mentre 2008, Comput Methods Programs
 * Biomed 90:154-166, from memory): mean = 0 (Student t-test), variance = 1 (chi-square test of
 * (n - 1) s^2, two-sided), normality (Shapiro-Wilk W with Royston's approximation of its
 * coefficients and null distribution, Royston 1995, Appl Statist 44:547-551, algorithm AS R94,
 * from memory; n from 3 to 5000), and a global test: the smallest p-value times 3
 * (Bonferroni).
 */
import { normalCdf, normalQuantile } from '../rng/index.js';
import { chiSquareCdf, studentTTwoSided, summarise } from './distributions.js';

export interface TestResult {
  statistic: number;
  pValue: number;
}

export interface NpdeTests {
  n: number;
  mean: number;
  variance: number;
  meanTest: TestResult & { name: string };
  varianceTest: TestResult & { name: string };
  normalityTest: TestResult & { name: string };
  globalTest: { name: string; pValue: number };
}

function poly(c: readonly number[], x: number): number {
  let v = 0;
  for (let i = c.length - 1; i >= 0; i--) v = v * x + c[i];
  return v;
}

/** Shapiro-Wilk W and its p-value (Royston 1995); NaN outside 3 <= n <= 5000 or for constant data. */
export function shapiroWilk(values: ArrayLike<number>): TestResult {
  const x = Float64Array.from(values).filter((v) => Number.isFinite(v)).sort();
  const n = x.length;
  if (n < 3 || n > 5000 || x[n - 1] - x[0] < 1e-300) return { statistic: NaN, pValue: NaN };
  const nn2 = n >> 1;
  const m = new Float64Array(n);
  let mm = 0;
  for (let i = 0; i < n; i++) {
    m[i] = normalQuantile((i + 1 - 0.375) / (n + 0.25));
    mm += m[i] * m[i];
  }
  const a = new Float64Array(n);
  if (n === 3) {
    a[0] = -Math.SQRT1_2;
    a[2] = Math.SQRT1_2;
  } else {
    const u = 1 / Math.sqrt(n);
    const an = m[n - 1] / Math.sqrt(mm) + poly([0, 0.221157, -0.147981, -2.07119, 4.434685, -2.706056], u);
    if (n > 5) {
      const an1 = m[n - 2] / Math.sqrt(mm) + poly([0, 0.042981, -0.293762, -1.752461, 5.682633, -3.582633], u);
      const phi = (mm - 2 * m[n - 1] * m[n - 1] - 2 * m[n - 2] * m[n - 2]) / (1 - 2 * an * an - 2 * an1 * an1);
      for (let i = 2; i < n - 2; i++) a[i] = m[i] / Math.sqrt(phi);
      a[n - 1] = an;
      a[0] = -an;
      a[n - 2] = an1;
      a[1] = -an1;
    } else {
      const phi = (mm - 2 * m[n - 1] * m[n - 1]) / (1 - 2 * an * an);
      for (let i = 1; i < n - 1; i++) a[i] = m[i] / Math.sqrt(phi);
      a[n - 1] = an;
      a[0] = -an;
    }
  }
  let mean = 0;
  for (let i = 0; i < n; i++) mean += x[i];
  mean /= n;
  let num = 0, den = 0;
  for (let i = 0; i < n; i++) {
    num += a[i] * x[i];
    den += (x[i] - mean) * (x[i] - mean);
  }
  void nn2;
  const w = Math.min(1, (num * num) / den);
  let p: number;
  if (n === 3) {
    p = Math.max(0, Math.min(1, (6 / Math.PI) * (Math.asin(Math.sqrt(w)) - Math.asin(Math.sqrt(0.75)))));
  } else if (n <= 11) {
    const gamma = poly([-2.273, 0.459], n);
    const y = -Math.log(gamma - Math.log1p(-w));
    const mu = poly([0.544, -0.39978, 0.025054, -6.714e-4], n);
    const sigma = Math.exp(poly([1.3822, -0.77857, 0.062767, -0.0020322], n));
    p = normalCdf((mu - y) / sigma);
  } else {
    const ln = Math.log(n);
    const y = Math.log1p(-w);
    const mu = poly([-1.5861, -0.31082, -0.083751, 0.0038915], ln);
    const sigma = Math.exp(poly([-0.4803, -0.082676, 0.0030302], ln));
    p = normalCdf((mu - y) / sigma);
  }
  return { statistic: w, pValue: p };
}

export function npdeTests(npde: ArrayLike<number>): NpdeTests {
  const s = summarise(npde);
  const n = s.n;
  const t = s.mean / Math.sqrt(s.variance / n);
  const chi = (n - 1) * s.variance;
  const c = chiSquareCdf(chi, n - 1);
  const finite: number[] = [];
  for (let i = 0; i < npde.length; i++) if (Number.isFinite(npde[i])) finite.push(npde[i]);
  // Beyond 5000 values the approximation does not hold: test an evenly spaced subsample.
  const sample = finite.length > 5000 ? finite.filter((_, i) => i % Math.ceil(finite.length / 5000) === 0) : finite;
  const sw = shapiroWilk(sample);
  const ps = [studentTTwoSided(t, n - 1), Math.min(1, 2 * Math.min(c, 1 - c)), sw.pValue];
  return {
    n,
    mean: s.mean,
    variance: s.variance,
    meanTest: { name: 'Student t-test, mean = 0', statistic: t, pValue: ps[0] },
    varianceTest: { name: 'chi-square test, variance = 1', statistic: chi, pValue: ps[1] },
    normalityTest: { name: `Shapiro-Wilk (Royston 1995)${sample.length < finite.length ? `, on ${sample.length} evenly spaced values` : ''}`, statistic: sw.statistic, pValue: sw.pValue },
    globalTest: { name: 'Bonferroni: 3 x smallest p-value', pValue: Math.min(1, 3 * Math.min(...ps.map((p) => (Number.isFinite(p) ? p : 1)))) },
  };
}
