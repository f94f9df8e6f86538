/**
 * The shared MH kernels: deterministic checks with a stubbed random stream (exact acceptance
 * decisions, hand-worked ratios), then seeded runs against a closed-form Gaussian posterior.
 */
import { describe, expect, it } from 'vitest';
import {
  buildComponentwiseKernel,
  buildIndependenceKernel,
  buildRandomWalkKernel,
  initChainState,
  scaleAdaptation,
  type LogDensityTarget,
} from '../../../engine/mcmc/kernels.js';
import { createStreams, type RngStream } from '../../../engine/rng/index.js';

function stub(normals: number[], uniforms: number[], exponentials: number[] = []): RngStream {
  const take = (q: number[], what: string) => () => {
    const v = q.shift();
    if (v === undefined) throw new Error(`stub ran out of ${what}`);
    return v;
  };
  const normal = take(normals.slice(), 'normals');
  return {
    path: 'stub',
    normal,
    fillNormal: (out: Float64Array) => {
      for (let i = 0; i < out.length; i++) out[i] = normal();
    },
    uniform: take(uniforms.slice(), 'uniforms'),
    fillUniform: () => undefined,
    int: () => 0,
    exponential: take(exponentials.slice(), 'exponentials'),
    stream: () => stub([], []),
  };
}

/** y ~ N(x, 1) per component with y = yObs, prior N(0, I). */
function gaussTarget(yObs: number[]): LogDensityTarget & { accepted: number } {
  const t = {
    dim: yObs.length,
    accepted: 0,
    logLikelihood(x: Float64Array) {
      let s = 0;
      for (let k = 0; k < x.length; k++) s -= 0.5 * (x[k] - yObs[k]) ** 2;
      return s;
    },
    logPrior(x: Float64Array) {
      let s = 0;
      for (let k = 0; k < x.length; k++) s -= 0.5 * x[k] ** 2;
      return s;
    },
    accept() {
      t.accepted++;
    },
  };
  return t;
}

const I1 = Float64Array.from([1]);

describe('independence kernel', () => {
  it('with the prior as proposal accepts on the likelihood ratio alone', () => {
    // x = 0 -> x* = 3 (z = 3): log ratio = -0.5 (3 - 1)^2 + 0.5 (0 - 1)^2 = -1.5, exp(-1.5) = 0.22313 (hand-worked).
    const k = buildIndependenceKernel({ dim: 1, df: null, priorProposal: true });
    const t = gaussTarget([1]);
    const s = initChainState(t, Float64Array.from([0]));
    expect(k.step(stub([3], [0.23]), t, s, [0], I1)).toBe(false);
    expect(s.position[0]).toBe(0);
    expect(t.accepted).toBe(0);
    expect(k.step(stub([3], [0.22]), t, s, [0], I1)).toBe(true);
    expect(s.position[0]).toBe(3);
    expect(s.logLikelihood).toBe(-2);
    expect(s.logPrior).toBe(-4.5);
    expect(t.accepted).toBe(1);
  });

  it('Student-t (df 5) uses the full Hastings ratio', () => {
    // Target log p = -x^2 / 2 (all in logLikelihood). z = 2, chi2 = 2 (1 + 1) + 1^2 = 5, so w = 1
    // and x* = 2: log ratio = -2 + 3 log(1.8) = -0.2366, exp = 0.7893 (hand-worked).
    const k = buildIndependenceKernel({ dim: 1, df: 5, priorProposal: false });
    const t: LogDensityTarget = { dim: 1, logLikelihood: (x) => -0.5 * x[0] * x[0], logPrior: () => 0 };
    const s1 = initChainState(t, Float64Array.from([0]));
    expect(k.step(stub([2, 1], [0.78], [1, 1]), t, s1, [0], I1)).toBe(true);
    expect(s1.position[0]).toBe(2);
    expect(s1.logLikelihood).toBe(-2);
    const s2 = initChainState(t, Float64Array.from([0]));
    expect(k.step(stub([2, 1], [0.8], [1, 1]), t, s2, [0], I1)).toBe(false);
    expect(s2.position[0]).toBe(0);
  });

  it('rejects a non-finite likelihood without drawing a uniform', () => {
    const k = buildIndependenceKernel({ dim: 1, df: null, priorProposal: true });
    const t: LogDensityTarget = { dim: 1, logLikelihood: (x) => (x[0] > 1 ? NaN : 0), logPrior: () => 0 };
    const s = initChainState(t, Float64Array.from([0]));
    expect(k.step(stub([2], []), t, s, [0], I1)).toBe(false);
    expect(s.position[0]).toBe(0);
  });

  it('checks its configuration once, at build time', () => {
    expect(() => buildIndependenceKernel({ dim: 1, df: 2.5, priorProposal: false })).toThrow(/degrees of freedom/);
    expect(() => buildIndependenceKernel({ dim: 1, df: 5, priorProposal: true })).toThrow(/Gaussian/);
  });
});

describe('random-walk kernel', () => {
  it('steps by scale L z and applies the Metropolis ratio', () => {
    // L = [[1, 0], [0.5, 1]], scale 0.5, z = (1, 2): x* = (0.5, 1.25); target -|x|^2 / 2:
    // log ratio = -0.5 (0.25 + 1.5625) = -0.90625, exp = 0.40400 (hand-worked).
    const k = buildRandomWalkKernel(2);
    const L = Float64Array.from([1, 0, 0.5, 1]);
    const t: LogDensityTarget = { dim: 2, logLikelihood: (x) => -0.5 * (x[0] * x[0] + x[1] * x[1]), logPrior: () => 0 };
    const s = initChainState(t, new Float64Array(2));
    expect(k.step(stub([1, 2], [0.41]), t, s, L, 0.5)).toBe(false);
    expect(Array.from(s.position)).toEqual([0, 0]);
    expect(k.step(stub([1, 2], [0.4]), t, s, L, 0.5)).toBe(true);
    expect(Array.from(s.position)).toEqual([0.5, 1.25]);
    expect(s.logLikelihood).toBe(-0.90625);
  });
});

describe('component-wise kernel', () => {
  it('moves one component at a time and counts acceptances per component', () => {
    // sd (1, 2), z = (1, 1). Component 0: x* = (1, 0), log ratio -0.5 (exp 0.6065): u 0.6 accepts.
    // Component 1: x* = (1, 2), log ratio -2 (exp 0.1353): u 0.2 rejects (hand-worked).
    const k = buildComponentwiseKernel(2);
    const t: LogDensityTarget = { dim: 2, logLikelihood: (x) => -0.5 * (x[0] * x[0] + x[1] * x[1]), logPrior: () => 0 };
    const s = initChainState(t, new Float64Array(2));
    const acc = new Float64Array(2);
    expect(k.sweep(stub([1, 1], [0.6, 0.2]), t, s, [1, 2], acc)).toBe(1);
    expect(Array.from(s.position)).toEqual([1, 0]);
    expect(Array.from(acc)).toEqual([1, 0]);
    expect(s.logLikelihood).toBe(-0.5);
  });
});

describe('scale adaptation', () => {
  it('moves each scale by rate x (acceptance - target), clamps it, and resets the batch counts', () => {
    const a = scaleAdaptation({ target: 0.3, rate: 0.4, min: 0.1, max: 1.5 });
    const s = a.init(3, 1);
    s.accepted.set([5, 0, 10]);
    s.tries.set([10, 0, 10]);
    a.update(s);
    // 1 (1 + 0.4 (0.5 - 0.3)) = 1.08; untried stays 1; 1 (1 + 0.4 x 0.7) = 1.28.
    expect(s.scale[0]).toBeCloseTo(1.08, 15);
    expect(s.scale[1]).toBe(1);
    expect(s.scale[2]).toBeCloseTo(1.28, 15);
    expect(Array.from(s.tries)).toEqual([0, 0, 0]);
    s.accepted[2] = 10;
    s.tries[2] = 10;
    a.update(s);
    expect(s.scale[2]).toBe(1.5);
    const frozen = a.final(s);
    s.scale[0] = 99;
    expect(frozen[0]).toBeCloseTo(1.08, 15);
  });
});

describe('seeded draws match a closed-form Gaussian posterior', () => {
  // Prior x ~ N(0, Omega), y | x ~ N(x, s2 I): posterior covariance (Omega^-1 + I / s2)^-1 and
  // mean C y / s2 (conjugate normal; Gelman et al., Bayesian Data Analysis, 3rd ed. 2013, ch. 3, from memory).
  const omega = [1, 0.5, 0.5, 1];
  const s2 = 0.5;
  const y = [1, -0.5];
  const det = omega[0] * omega[3] - omega[1] * omega[2];
  const oi = [omega[3] / det, -omega[1] / det, -omega[2] / det, omega[0] / det];
  const P = [oi[0] + 1 / s2, oi[1], oi[2], oi[3] + 1 / s2];
  const dP = P[0] * P[3] - P[1] * P[2];
  const C = [P[3] / dP, -P[1] / dP, -P[2] / dP, P[0] / dP];
  const mean = [(C[0] * y[0] + C[1] * y[1]) / s2, (C[2] * y[0] + C[3] * y[1]) / s2];
  const L = Float64Array.from([1, 0, 0.5, Math.sqrt(0.75)]);
  const target: LogDensityTarget = {
    dim: 2,
    logLikelihood: (x) => (-0.5 * ((x[0] - y[0]) ** 2 + (x[1] - y[1]) ** 2)) / s2,
    logPrior: (x) => -0.5 * (x[0] * (oi[0] * x[0] + oi[1] * x[1]) + x[1] * (oi[2] * x[0] + oi[3] * x[1])),
  };

  function moments(run: (rng: RngStream, x: Float64Array) => void, n: number) {
    const rng = createStreams(7).stream('mcmc-test');
    const x = new Float64Array(2);
    const m = [0, 0];
    const q = [0, 0, 0];
    for (let it = 0; it < 500; it++) run(rng, x);
    for (let it = 0; it < n; it++) {
      run(rng, x);
      m[0] += x[0];
      m[1] += x[1];
      q[0] += x[0] * x[0];
      q[1] += x[0] * x[1];
      q[2] += x[1] * x[1];
    }
    const mu = [m[0] / n, m[1] / n];
    return { mu, cov: [q[0] / n - mu[0] ** 2, q[1] / n - mu[0] * mu[1], q[2] / n - mu[1] ** 2] };
  }

  it('estimator configuration: prior proposal, random walk on Omega, component-wise', () => {
    const ind = buildIndependenceKernel({ dim: 2, df: null, priorProposal: true });
    const rw = buildRandomWalkKernel(2);
    const cw = buildComponentwiseKernel(2);
    const sd = [0.5, 0.5];
    let state: ReturnType<typeof initChainState> | null = null;
    const r = moments((rng, x) => {
      state ??= initChainState(target, x);
      ind.step(rng, target, state, [0, 0], L);
      rw.step(rng, target, state, L, 0.8);
      cw.sweep(rng, target, state, sd);
    }, 20000);
    // Tolerance: a few Monte Carlo SEs at 20000 correlated draws (posterior SDs about 0.55).
    expect(Math.abs(r.mu[0] - mean[0])).toBeLessThan(0.03);
    expect(Math.abs(r.mu[1] - mean[1])).toBeLessThan(0.03);
    expect(Math.abs(r.cov[0] - C[0])).toBeLessThan(0.03);
    expect(Math.abs(r.cov[1] - C[1])).toBeLessThan(0.03);
    expect(Math.abs(r.cov[2] - C[3])).toBeLessThan(0.03);
  });

  it('dosing configuration: Student-t independence at the mode and a 2.38 / sqrt(d) random walk', () => {
    const Lc = Float64Array.from([Math.sqrt(C[0]), 0, C[1] / Math.sqrt(C[0]), Math.sqrt(C[3] - (C[1] * C[1]) / C[0])]);
    const ind = buildIndependenceKernel({ dim: 2, df: 5, priorProposal: false });
    const rw = buildRandomWalkKernel(2);
    let state: ReturnType<typeof initChainState> | null = null;
    const r = moments((rng, x) => {
      state ??= initChainState(target, x);
      ind.step(rng, target, state, mean, Lc);
      rw.step(rng, target, state, Lc, 2.38 / Math.sqrt(2));
    }, 20000);
    expect(Math.abs(r.mu[0] - mean[0])).toBeLessThan(0.02);
    expect(Math.abs(r.mu[1] - mean[1])).toBeLessThan(0.02);
    expect(Math.abs(r.cov[0] - C[0])).toBeLessThan(0.02);
    expect(Math.abs(r.cov[1] - C[1])).toBeLessThan(0.02);
    expect(Math.abs(r.cov[2] - C[3])).toBeLessThan(0.02);
  });
});
