import { describe, expect, it } from 'vitest';
import { createStreams, normalCdf } from '../../../engine/rng/index.js';

function draw(seed: number | string, path: (string | number)[], n = 8): number[] {
  const s = createStreams(seed).stream(...path);
  return Array.from({ length: n }, () => s.uniform());
}

describe('createStreams', () => {
  it('same seed and path give the same stream, bit for bit', () => {
    expect(draw(42, ['saem', 'subject', 12, 'chain', 3])).toEqual(draw(42, ['saem', 'subject', 12, 'chain', 3]));
    const a = createStreams('fit-7').stream('x');
    const b = createStreams('fit-7').stream('x');
    const na = new Float64Array(101);
    const nb = new Float64Array(101);
    a.fillNormal(na);
    b.fillNormal(nb);
    expect([...na]).toEqual([...nb]);
  });

  it('a stream does not depend on other streams being created or drawn first', () => {
    const root = createStreams(7);
    const other = root.stream('saem', 'subject', 1);
    for (let i = 0; i < 1000; i++) other.normal();
    expect(draw(7, ['saem', 'subject', 2])).toEqual(
      (() => {
        const s = root.stream('saem', 'subject', 2);
        return Array.from({ length: 8 }, () => s.uniform());
      })(),
    );
  });

  it('different seeds, paths, and number-vs-text parts differ', () => {
    const base = draw(1, ['saem', 'subject', 1]);
    expect(draw(2, ['saem', 'subject', 1])).not.toEqual(base);
    expect(draw(1, ['saem', 'subject', 2])).not.toEqual(base);
    expect(draw(1, ['saem', 'subject', '1'])).not.toEqual(base);
    expect(draw(1, ['saem/subject', 1])).not.toEqual(base);
    expect(draw('1', ['saem', 'subject', 1])).not.toEqual(base);
    const child = createStreams(1).stream('saem').stream('subject', 1);
    expect(Array.from({ length: 8 }, () => child.uniform())).toEqual(base);
  });

  it('streams of neighbouring subjects are uncorrelated', () => {
    const root = createStreams(2024);
    const n = 20000;
    const x = new Float64Array(n);
    const y = new Float64Array(n);
    root.stream('subject', 1).fillNormal(x);
    root.stream('subject', 2).fillNormal(y);
    let sxy = 0;
    for (let i = 0; i < n; i++) sxy += x[i] * y[i];
    // Correlation of independent N(0,1) samples has SD 1/sqrt(n) ~ 0.007 (common practice: 5 SD bound).
    expect(Math.abs(sxy / n)).toBeLessThan(5 / Math.sqrt(n));
  });

  it('uniform stays in (0, 1) and int(n) is in range', () => {
    const s = createStreams(3).stream('u');
    let min = 1;
    let max = 0;
    for (let i = 0; i < 100000; i++) {
      const u = s.uniform();
      min = Math.min(min, u);
      max = Math.max(max, u);
    }
    expect(min).toBeGreaterThan(0);
    expect(max).toBeLessThan(1);
    const counts = new Array(7).fill(0);
    for (let i = 0; i < 70000; i++) counts[s.int(7)]++;
    for (const c of counts) expect(Math.abs(c - 10000)).toBeLessThan(500); // ~5 SD of a binomial count
    expect(() => s.int(0)).toThrow(RangeError);
  });

  it('normal deviates: moments and Kolmogorov-Smirnov against Phi', () => {
    const n = 200000;
    const z = new Float64Array(n);
    createStreams(99).stream('moments').fillNormal(z);
    let m1 = 0, m2 = 0, m3 = 0, m4 = 0;
    for (const v of z) {
      m1 += v;
      m2 += v * v;
      m3 += v * v * v;
      m4 += v * v * v * v;
    }
    m1 /= n; m2 /= n; m3 /= n; m4 /= n;
    // Sampling SDs of the raw moments of N(0,1): sqrt(1/n), sqrt(2/n), sqrt(15/n), sqrt(96/n) (exact formulas).
    expect(Math.abs(m1)).toBeLessThan(5 * Math.sqrt(1 / n));
    expect(Math.abs(m2 - 1)).toBeLessThan(5 * Math.sqrt(2 / n));
    expect(Math.abs(m3)).toBeLessThan(5 * Math.sqrt(15 / n));
    expect(Math.abs(m4 - 3)).toBeLessThan(5 * Math.sqrt(96 / n));
    const sorted = Float64Array.from(z).sort();
    let d = 0;
    for (let i = 0; i < n; i++) {
      const f = normalCdf(sorted[i]);
      d = Math.max(d, (i + 1) / n - f, f - i / n);
    }
    // KS critical value at alpha = 0.001: 1.95 / sqrt(n) (Smirnov's asymptotic distribution; common practice).
    expect(d).toBeLessThan(1.95 / Math.sqrt(n));
  });

  it('rejects seeds that are not whole numbers or text', () => {
    expect(() => createStreams(1.5)).toThrow(/whole number/);
    expect(() => createStreams('')).toThrow(/non-empty/);
    expect(() => createStreams(Number.NaN)).toThrow(/whole number/);
    expect(() => createStreams(1).stream(Number.POSITIVE_INFINITY)).toThrow(/finite/);
  });
});

describe('the generator', () => {
  it('draws the same sequence as seedrandom xor4096 double() seeded with the stream key', async () => {
    // Reference: the seedrandom package (xorgens 4096 of R. P. Brent, "Some long-period random
    // number generators using shifts and xors", 2007); the stream runs on a copy of its state.
    const seedrandom = (await import('seedrandom')).default;
    for (const [seed, path] of [[1, ['saem', 'subject', 0, 'chain', 0]], ['fit-7', ['x']], [123456789, ['posthoc', 3]]] as const) {
      const key = `plateau-rng-v1\u0000${typeof seed === 'number' ? `n${seed}` : `s${seed}`}\u0000${path.map((p) => (typeof p === 'number' ? `#${p}` : `$${p}`)).join('/')}`;
      const reference = seedrandom.xor4096(key);
      const stream = createStreams(seed).stream(...path);
      for (let k = 0; k < 5000; k++) expect(stream.uniform()).toBe(reference.double());
    }
  });
});
