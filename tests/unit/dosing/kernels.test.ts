/** Deterministic checks of the MH kernels with a stubbed random stream (exact numbers). */
import { describe, expect, it } from 'vitest';
import { buildKernels, effectiveSampleSize, splitRhat, type ChainState } from '../../../engine/dosing/posterior.js';
import type { RngStream } from '../../../engine/rng/index.js';

function stub(normals: number[], uniforms: number[]): RngStream {
  const n = normals.slice();
  const u = uniforms.slice();
  const next = () => {
    const v = n.shift();
    if (v === undefined) throw new Error('stub ran out of normals');
    return v;
  };
  return {
    path: 'stub',
    normal: next,
    fillNormal: (out: Float64Array) => {
      for (let i = 0; i < out.length; i++) out[i] = next();
    },
    uniform: () => {
      const v = u.shift();
      if (v === undefined) throw new Error('stub ran out of uniforms');
      return v;
    },
    fillUniform: () => undefined,
    int: () => 0,
    exponential: () => 1,
    stream: () => stub(normals, uniforms),
  };
}

const logPost = (x: Float64Array) => -0.5 * x[0] * x[0];
const kernels = () => buildKernels(logPost, Float64Array.from([0]), Float64Array.from([1]), 5);
const at0 = (k: ReturnType<typeof kernels>): ChainState => ({ eta: Float64Array.from([0]), logPost: 0, logQ: k.logQ(Float64Array.from([0])) });

describe('independence kernel (Student-t, df 5)', () => {
  // Proposal z = 2 with chi2 = 5 (w = 1): x* = 2, log ratio = -2 + 3 log(1.8) = -0.2366 (hand-worked).
  it('accepts when log u is below the log ratio and rejects otherwise', () => {
    const k = kernels();
    const s1 = at0(k);
    expect(k.independence(stub([2, 1, 1, 1, 1, 1], [0.78]), s1)).toBe(true);
    expect(s1.eta[0]).toBe(2);
    expect(s1.logPost).toBe(-2);
    expect(s1.logQ).toBeCloseTo(-3 * Math.log(1.8), 12);
    const s2 = at0(k);
    expect(k.independence(stub([2, 1, 1, 1, 1, 1], [0.8]), s2)).toBe(false);
    expect(s2.eta[0]).toBe(0);
  });
});

describe('random-walk kernel', () => {
  // Step 2.38 / sqrt(1) x z: z = 1 gives x* = 2.38, acceptance probability exp(-2.38^2 / 2) = 0.0589.
  it('uses the 2.38 / sqrt(d) scale and the Metropolis ratio', () => {
    const k = kernels();
    const s = at0(k);
    expect(k.randomWalk(stub([1], [0.058]), s)).toBe(true);
    expect(s.eta[0]).toBeCloseTo(2.38, 15);
    const s2 = at0(k);
    expect(k.randomWalk(stub([1], [0.06]), s2)).toBe(false);
  });
  it('treats a non-finite log density as a rejection, not an error', () => {
    const k = buildKernels(() => NaN, Float64Array.from([0]), Float64Array.from([1]), 5);
    const s: ChainState = { eta: Float64Array.from([0]), logPost: 0, logQ: 0 };
    expect(k.randomWalk(stub([1], [1e-12]), s)).toBe(false);
    expect(s.eta[0]).toBe(0);
  });
});

describe('convergence diagnostics', () => {
  it('ESS of independent draws is about n; split R-hat flags chains that disagree', () => {
    // A linear congruential sequence (glibc constants, from memory): serially uncorrelated enough here.
    const n = 4000;
    const x = new Float64Array(n);
    let s = 12345;
    for (let i = 0; i < n; i++) {
      s = (s * 1103515245 + 12345) % 2147483648;
      x[i] = s / 2147483648 - 0.5;
    }
    const ess = effectiveSampleSize(x, 4);
    expect(ess).toBeGreaterThan(0.8 * n);
    expect(splitRhat(x, 4)).toBeLessThan(1.01);
    for (let i = 0; i < 1000; i++) x[i] += 2;
    expect(splitRhat(x, 4)).toBeGreaterThan(1.1);
  });
});
