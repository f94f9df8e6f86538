/**
 * Distribution functions for the diagnostic tests: log-gamma (Lanczos, g = 7, n = 9), the
 * regularised incomplete beta (continued fraction, modified Lentz) and gamma (series / continued
 * fraction) functions (Press et al., Numerical Recipes 3rd ed. 2007, sections 6.1, 6.2, 6.4,
 * from memory), Student-t and chi-square tail probabilities, and sample summaries.
 */

const LANCZOS = [0.99999999999980993, 676.5203681218851, -1259.1392167224028, 771.32342877765313, -176.61502916214059,
  12.507343278686905, -0.13857109526572012, 9.9843695780195716e-6, 1.5056327351493116e-7];

/** log Gamma(x) for x > 0. */
export function logGamma(x: number): number {
  if (x < 0.5) return Math.log(Math.PI / Math.abs(Math.sin(Math.PI * x))) - logGamma(1 - x);
  const z = x - 1;
  let a = LANCZOS[0];
  const t = z + 7.5;
  for (let i = 1; i < 9; i++) a += LANCZOS[i] / (z + i);
  return 0.5 * Math.log(2 * Math.PI) + (z + 0.5) * Math.log(t) - t + Math.log(a);
}

function betaContinuedFraction(a: number, b: number, x: number): number {
  const tiny = 1e-300;
  let c = 1;
  let d = 1 - ((a + b) * x) / (a + 1);
  if (Math.abs(d) < tiny) d = tiny;
  d = 1 / d;
  let h = d;
  for (let m = 1; m <= 300; m++) {
    const m2 = 2 * m;
    let aa = (m * (b - m) * x) / ((a + m2 - 1) * (a + m2));
    d = 1 + aa * d;
    if (Math.abs(d) < tiny) d = tiny;
    c = 1 + aa / c;
    if (Math.abs(c) < tiny) c = tiny;
    d = 1 / d;
    h *= d * c;
    aa = (-(a + m) * (a + b + m) * x) / ((a + m2) * (a + m2 + 1));
    d = 1 + aa * d;
    if (Math.abs(d) < tiny) d = tiny;
    c = 1 + aa / c;
    if (Math.abs(c) < tiny) c = tiny;
    d = 1 / d;
    const del = d * c;
    h *= del;
    if (Math.abs(del - 1) < 1e-15) break;
  }
  return h;
}

/** Regularised incomplete beta I_x(a, b). */
export function incompleteBeta(x: number, a: number, b: number): number {
  if (!(x >= 0 && x <= 1)) return NaN;
  if (x === 0 || x === 1) return x;
  const lnFront = logGamma(a + b) - logGamma(a) - logGamma(b) + a * Math.log(x) + b * Math.log1p(-x);
  if (x < (a + 1) / (a + b + 2)) return (Math.exp(lnFront) * betaContinuedFraction(a, b, x)) / a;
  return 1 - (Math.exp(lnFront) * betaContinuedFraction(b, a, 1 - x)) / b;
}

/** Regularised lower incomplete gamma P(a, x). */
export function incompleteGammaLower(a: number, x: number): number {
  if (!(x >= 0) || !(a > 0)) return NaN;
  if (x === 0) return 0;
  const lnFront = -x + a * Math.log(x) - logGamma(a);
  if (x < a + 1) {
    let sum = 1 / a;
    let term = sum;
    for (let n = 1; n < 1000; n++) {
      term *= x / (a + n);
      sum += term;
      if (Math.abs(term) < Math.abs(sum) * 1e-16) break;
    }
    return sum * Math.exp(lnFront);
  }
  const tiny = 1e-300;
  let b = x + 1 - a;
  let c = 1 / tiny;
  let d = 1 / b;
  let h = d;
  for (let i = 1; i < 1000; i++) {
    const an = -i * (i - a);
    b += 2;
    d = an * d + b;
    if (Math.abs(d) < tiny) d = tiny;
    c = b + an / c;
    if (Math.abs(c) < tiny) c = tiny;
    d = 1 / d;
    const del = d * c;
    h *= del;
    if (Math.abs(del - 1) < 1e-15) break;
  }
  return 1 - Math.exp(lnFront) * h;
}

/** P(T <= t) for Student's t with df degrees of freedom. */
export function studentTCdf(t: number, df: number): number {
  if (t !== t) return NaN;
  const x = df / (df + t * t);
  const tail = 0.5 * incompleteBeta(x, df / 2, 0.5);
  return t > 0 ? 1 - tail : tail;
}

/** P(X <= x) for chi-square with df degrees of freedom. */
export function chiSquareCdf(x: number, df: number): number {
  return x <= 0 ? 0 : incompleteGammaLower(df / 2, x / 2);
}

/** Two-sided p-value of a t statistic. */
export function studentTTwoSided(t: number, df: number): number {
  return Math.min(1, 2 * studentTCdf(-Math.abs(t), df));
}

/** Empirical quantile of sorted values (linear interpolation between order statistics, "type 7"). */
export function quantileSorted(sorted: ArrayLike<number>, n: number, q: number): number {
  if (n === 0) return NaN;
  const h = (n - 1) * q;
  const lo = Math.floor(h);
  const hi = Math.min(n - 1, lo + 1);
  return sorted[lo] + (h - lo) * (sorted[hi] - sorted[lo]);
}

export interface SampleSummary {
  n: number;
  mean: number;
  variance: number;
  skewness: number;
  /** Excess kurtosis. */
  kurtosis: number;
}

/** Mean, unbiased variance, moment skewness and excess kurtosis of finite values. */
export function summarise(values: ArrayLike<number>): SampleSummary {
  let n = 0;
  let s = 0;
  for (let i = 0; i < values.length; i++) if (Number.isFinite(values[i])) (n++, (s += values[i]));
  const mean = n > 0 ? s / n : NaN;
  let m2 = 0, m3 = 0, m4 = 0;
  for (let i = 0; i < values.length; i++) {
    const v = values[i];
    if (!Number.isFinite(v)) continue;
    const d = v - mean;
    const d2 = d * d;
    m2 += d2;
    m3 += d2 * d;
    m4 += d2 * d2;
  }
  const variance = n > 1 ? m2 / (n - 1) : NaN;
  const mm2 = m2 / n;
  return { n, mean, variance, skewness: (m3 / n) / Math.pow(mm2, 1.5), kurtosis: (m4 / n) / (mm2 * mm2) - 3 };
}
