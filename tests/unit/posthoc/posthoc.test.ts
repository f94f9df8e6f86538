/**
 * Unit checks of the post-fit building blocks: finite differences, the working-scale parameter
 * vector, the information summary (failures reported, never a silent NaN), the conditional
 * sampler on a case with a closed-form posterior and importance-sampling diagnostics.
 */
import { describe, expect, it } from 'vitest';
import { createDataset } from '../../../engine/data/dataset.js';
import type { Dose } from '../../../engine/data/types.js';
import type { StructuralModel } from '../../../engine/models/types.js';
import { conditionalDistribution } from '../../../engine/posthoc/conditional.js';
import { buildDensity } from '../../../engine/posthoc/density.js';
import { residualDerivatives, standardErrors } from '../../../engine/posthoc/fisher.js';
import { observationLogLik } from '../../../engine/stats/residual.js';
import { importanceSamplingLikelihood } from '../../../engine/posthoc/likelihood.js';
import { buildLinearisation, linearisedMinus2LL } from '../../../engine/posthoc/linearised.js';
import { binEdges, computeDiagnostics, covariateRelations } from '../../../engine/posthoc/diagnostics.js';
import { PosthocError, runPosthoc } from '../../../engine/posthoc/index.js';
import { conditionalModes } from '../../../engine/posthoc/modes.js';
import { centralGradient, centralHessian } from '../../../engine/optim/finiteDifferences.js';
import { fromWorking, parameterLayout, thetaFromPopulation, toWorking } from '../../../engine/posthoc/parameters.js';
import { parseModelSpec } from '../../../engine/spec/modelSpec.js';
import { compileModel } from '../../../engine/stats/model.js';

/**
 * A structural model that is linear in its parameter: the level is CL itself at every time
 * (transform none), so y_ij = mu + eta_i + eps_ij, the random-intercept model whose marginal
 * likelihood and posterior are Gaussian in closed form (e.g. Pinheiro & Bates 2000, ch. 2).
 */
const interceptModel: StructuralModel = {
  id: '1cmt',
  label: 'level = CL (test model)',
  parameterOrder: ['CL', 'V'],
  parameters: [
    { name: 'CL', unit: 'mg/L', description: 'level', defaultInitial: 1, transforms: ['none', 'log'] },
    { name: 'V', unit: 'L', description: 'unused', defaultInitial: 1, transforms: ['log', 'none'], defaultWhenAbsent: 1 },
  ],
  compartments: 1,
  equation: 'C = CL',
  sketch: '',
  analytic: true,
  prepare(_doses: readonly Dose[], times: ArrayLike<number>) {
    const n = times.length;
    return (p: Float64Array, out: Float64Array) => {
      for (let k = 0; k < n; k++) out[k] = p[0];
      return true;
    };
  },
};

function interceptData(values: number[][]) {
  return createDataset(values.map((ys, i) => ({ id: `S${i + 1}`, doses: [{ timeH: 0, amountMg: 1, route: 'bolus' as const, durationH: 0 }], observations: ys.map((y, k) => ({ timeH: k + 1, valueMgL: y, censored: false })) })));
}
const interceptSpec = parseModelSpec({ structure: '1cmt', parameters: { CL: { typical: 10, transform: 'none', bsv: 2 }, V: { typical: 1, bsv: null, fixed: true } }, residual: { model: 'additive', a: 1 } });

describe('finite differences', () => {
  it('are exact on a quadratic up to rounding (central differences have no O(h^2) error term there)', () => {
    const f = (v: Float64Array) => 3 * v[0] * v[0] + 2 * v[0] * v[1] - v[1] * v[1] + v[0];
    const x = Float64Array.from([0.7, -1.3]);
    const g = new Float64Array(2);
    const h = new Float64Array(4);
    centralGradient(f, x, g, 1e-4);
    centralHessian(f, x, h, 1e-3);
    expect(g[0]).toBeCloseTo(6 * 0.7 + 2 * -1.3 + 1, 7);
    expect(g[1]).toBeCloseTo(2 * 0.7 - 2 * -1.3, 7);
    expect(Array.from(h).map((v) => Number(v.toFixed(5)))).toEqual([6, 2, 2, -2]);
    expect(Array.from(x)).toEqual([0.7, -1.3]);
  });
  it('give NaN, not an exception, across an impossible point', () => {
    const g = new Float64Array(1);
    centralGradient(() => NaN, Float64Array.from([0]), g, 1e-4);
    expect(Number.isNaN(g[0])).toBe(true);
  });
});

describe('residual derivatives for Louis\' formula', () => {
  it('match central differences of the residual log-likelihood (engine/stats/residual.ts) in log a, log b', () => {
    const y = [1.2, 3.4, 0.8, 7.7];
    const f = [1.0, 3.9, 0.5, 8.1];
    for (const [rm, which] of [['combined', [0, 1]], ['additive', [0]], ['proportional', [1]], ['log-additive', [0]]] as const) {
      const a = 0.3, b = 0.2;
      const ll = (la: number, lb: number) => y.reduce((acc, yy, o) => acc + observationLogLik(rm, Math.exp(la), Math.exp(lb), yy, f[o], false, 0), 0);
      const w = Int32Array.from(which);
      const n = which.length;
      const g = new Float64Array(n);
      const h = new Float64Array(n * n);
      expect(residualDerivatives(rm, a, b, y, f, w, g, h)).toBe(true);
      const x0 = [Math.log(a), Math.log(b)];
      const at = (d: number[]) => ll(x0[0] + d[0], x0[1] + d[1]);
      const e = 1e-4;
      which.forEach((wi, r) => {
        const step = [0, 0];
        step[wi] = e;
        const minus = step.map((v) => -v);
        expect(g[r]).toBeCloseTo((at(step) - at(minus)) / (2 * e), 5);
        expect(h[r * n + r]).toBeCloseTo((at(step) - 2 * at([0, 0]) + at(minus)) / (e * e), 3);
      });
      if (n === 2) expect(h[1]).toBeCloseTo((at([e, e]) - at([e, -e]) - at([-e, e]) + at([-e, -e])) / (4 * e * e), 3);
    }
  });
});

describe('working-scale parameters', () => {
  it('round-trip through the record order (typical, bsv, correlation, residual)', () => {
    const spec = parseModelSpec({
      structure: '1cmt',
      parameters: { CL: { typical: 3, bsv: 0.3 }, V: { typical: 30, bsv: 0.2 }, ka: { typical: 1, bsv: null } },
      correlations: [['CL', 'V']],
      correlationValues: { 'CL,V': 0.4 },
      residual: { model: 'combined', a: 0.1, b: 0.2 },
    });
    const data = createDataset([
      { id: 'a', doses: [{ timeH: 0, amountMg: 100, route: 'oral', durationH: 0 }], observations: [{ timeH: 1, valueMgL: 1, censored: false }] },
      { id: 'b', doses: [{ timeH: 0, amountMg: 100, route: 'oral', durationH: 0 }], observations: [{ timeH: 2, valueMgL: 1, censored: false }] },
    ]);
    const model = compileModel(spec, data);
    const layout = parameterLayout(model);
    expect(layout.entries.map((e) => e.kind)).toEqual(['typical', 'typical', 'typical', 'bsv', 'bsv', 'correlation', 'residual', 'residual']);
    const w = toWorking(model, layout, model.initial);
    const back = fromWorking(model, layout, w);
    for (let q = 0; q < 4; q++) expect(back.omega[q]).toBeCloseTo(model.initial.omega[q], 12);
    expect(back.a).toBeCloseTo(0.1, 12);
    const population = [
      { parameter: 'CL', kind: 'typical', estimate: 3 }, { parameter: 'V', kind: 'typical', estimate: 30 }, { parameter: 'ka', kind: 'typical', estimate: 1 },
      { parameter: 'CL', kind: 'bsv', estimate: 0.3 }, { parameter: 'V', kind: 'bsv', estimate: 0.2 }, { parameter: 'CL,V', kind: 'correlation', estimate: 0.4 },
      { parameter: 'a', kind: 'residual', estimate: 0.1 }, { parameter: 'b', kind: 'residual', estimate: 0.2 },
    ];
    const th = thetaFromPopulation(model, population);
    expect(th.omega[1]).toBeCloseTo(0.4 * 0.3 * 0.2, 12);
    expect(() => thetaFromPopulation(model, population.slice(1))).toThrow(/lists 7 population estimates but the model has 8/);
  });
});

describe('information summary', () => {
  const model = compileModel(interceptSpec, interceptData([[9, 10], [12, 11], [8, 9]]), { structuralModel: interceptModel });
  const layout = parameterLayout(model);
  it('a singular information gives no SEs and says why (no NaN)', () => {
    const info = { method: 'linearisation' as const, size: 3, matrix: Float64Array.from([1, 1, 0, 1, 1, 0, 0, 0, 1]), warnings: [] };
    const se = standardErrors(model, layout, model.initial, info);
    expect(se.ok).toBe(false);
    expect(se.se.every((v) => v === null)).toBe(true);
    expect(se.warnings.join(' ')).toMatch(/not positive definite.*not identifiable/);
  });
  it('a near-singular information gives SEs with a warning', () => {
    const info = { method: 'linearisation' as const, size: 3, matrix: Float64Array.from([1, 0.99999999995, 0, 0.99999999995, 1, 0, 0, 0, 1]), warnings: [] };
    const se = standardErrors(model, layout, model.initial, info);
    expect(se.ok).toBe(true);
    expect(se.conditionNumber!).toBeGreaterThan(1e8);
    expect(se.warnings.join(' ')).toMatch(/near-singular/);
  });
  it('non-finite information is reported', () => {
    const se = standardErrors(model, layout, model.initial, { method: 'linearisation', size: 3, matrix: Float64Array.from([NaN, 0, 0, 0, 1, 0, 0, 0, 1]), warnings: [] });
    expect(se.ok).toBe(false);
    expect(se.warnings.join(' ')).toMatch(/non-finite/);
  });
});

describe('random-intercept model: closed-form posterior and marginal likelihood', () => {
  // y_i | eta ~ N(mu + eta, a^2 I), eta ~ N(0, w^2): posterior N(m_i, v), v = 1 / (n/a^2 + 1/w^2),
  // m_i = v sum(y - mu) / a^2; marginal y_i ~ N(mu 1, a^2 I + w^2 11') (normal-normal conjugacy).
  const ys = [[9, 10, 11], [12, 11, 13], [8, 9, 7], [10, 10, 12]];
  const model = compileModel(interceptSpec, interceptData(ys), { structuralModel: interceptModel });
  const theta = model.initial; // mu 10, w 2, a 1
  const density = buildDensity(model, theta)!;
  const modes = conditionalModes(density);
  const cond = conditionalDistribution(density, modes, { seed: 3, keepDraws: 200 });
  const v = 1 / (3 / 1 + 1 / 4);
  it('modes, Laplace covariance, conditional means and SDs match the conjugate posterior', () => {
    ys.forEach((y, i) => {
      const m = (v * y.reduce((s, x) => s + x - 10, 0)) / 1;
      expect(modes.eta[i]).toBeCloseTo(m, 5);
      expect(modes.laplaceCovariance[i]).toBeCloseTo(v, 4);
      // Monte Carlo error: about SD / sqrt(ESS), ESS a few hundred after settling; 0.25 SD is about 4 of them.
      expect(Math.abs(cond.mean[i] - m)).toBeLessThan(0.25 * Math.sqrt(v));
      expect(Math.abs(Math.sqrt(cond.covariance[i]) / Math.sqrt(v) - 1)).toBeLessThan(0.15);
      expect(cond.settled[i]).toBe(1);
    });
  });
  it('importance sampling and the linearised likelihood give the exact marginal -2LL (the model is linear)', () => {
    let exact = 0;
    for (const y of ys) {
      // det(a^2 I + w^2 11') = a^(2(n-1)) (a^2 + n w^2); quadratic form by Sherman-Morrison.
      const n = y.length;
      const r = y.map((x) => x - 10);
      const s = r.reduce((a, b) => a + b, 0);
      const q = r.reduce((a, b) => a + b * b, 0) - (4 * s * s) / (1 + n * 4);
      exact += n * Math.log(2 * Math.PI) + Math.log(1 + n * 4) + q;
    }
    const is = importanceSamplingLikelihood(density, cond, modes, { seed: 1, samplesPerSubject: 5000 });
    expect(Math.abs(is.minus2LL - exact)).toBeLessThan(4 * is.mcError + 1e-6);
    expect(Math.abs(linearisedMinus2LL(buildLinearisation(model, modes), theta) - exact)).toBeLessThan(1e-6);
  });
  it('a capped sampler reports the subjects that did not settle', () => {
    const c = conditionalDistribution(density, modes, { seed: 3, batch: 10, minBatches: 4, maxIterations: 30 });
    expect(Array.from(c.settled).every((s) => s === 0)).toBe(true);
    expect(c.warnings.join(' ')).toMatch(/had not settled after 30 iterations/);
  });
  it('degenerate importance weights are reported with the effective sample size', () => {
    const is = importanceSamplingLikelihood(density, cond, modes, { seed: 1, samplesPerSubject: 200, minEssFraction: 1 });
    expect(is.warnings.join(' ')).toMatch(/weights degenerate .*ESS/);
    for (const e of is.ess) expect(e).toBeGreaterThan(1);
  });
});

describe('VPC bins', () => {
  it('cut sorted times into bins of about equal counts and never split identical times', () => {
    // Bins [0, 1), [1, 2), [2, 4), [4, inf): counts 1, 3, 2, 2; the three 1s stay together.
    expect(binEdges([0, 1, 1, 1, 2, 3, 4, 5], 8, 4)).toEqual([0, 1, 2, 4, Infinity]);
  });
  it('use the time after the last dose when subjects have several doses (auto)', () => {
    const data = createDataset(
      [0, 1, 2, 3].map((i) => ({
        id: `S${i}`,
        doses: [0, 12, 24].map((t) => ({ timeH: t, amountMg: 1, route: 'bolus' as const, durationH: 0 })),
        observations: [2, 11, 26, 35].map((t, k) => ({ timeH: t, valueMgL: 10 + i - k, censored: false })),
      })),
    );
    const model = compileModel(interceptSpec, data, { structuralModel: interceptModel });
    const density = buildDensity(model, model.initial)!;
    const d = computeDiagnostics(density, conditionalModes(density), { seed: 1, replicates: 200 });
    expect(d.vpc.timeScale).toBe('timeAfterDose');
    for (const b of d.vpc.bins) expect(b.timeHighH).toBeLessThanOrEqual(11);
    expect(d.vpc.bins.reduce((a, b) => a + b.n, 0)).toBe(16);
    expect(computeDiagnostics(density, conditionalModes(density), { seed: 1, replicates: 200, vpcTime: 'time' }).vpc.bins.at(-1)!.timeHighH).toBe(35);
  });
});

describe('random effects against covariates', () => {
  it('find a relation the model leaves out (invented data: levels rise with weight) and list categorical levels', () => {
    const data = createDataset(
      [50, 60, 70, 80, 90, 100].map((w, i) => ({
        id: `S${i}`,
        covariates: { weight_kg: w, sex: i % 2 ? 'F' : 'M' },
        doses: [{ timeH: 0, amountMg: 1, route: 'bolus' as const, durationH: 0 }],
        observations: [1, 2, 3].map((t, k) => ({ timeH: t, valueMgL: 10 + (w - 75) / 10 + 0.1 * k, censored: false })),
      })),
      ['weight_kg', 'sex'],
    );
    const model = compileModel(interceptSpec, data, { structuralModel: interceptModel });
    const rel = covariateRelations(model, conditionalModes(buildDensity(model, model.initial)!));
    const w = rel.find((r) => r.covariate === 'weight_kg')!;
    expect(w.correlation!).toBeGreaterThan(0.99);
    expect(w.pValue!).toBeLessThan(0.001);
    const sex = rel.find((r) => r.covariate === 'sex')!;
    expect(sex.levels!.map((l) => [l.level, l.n])).toEqual([['F', 3], ['M', 3]]);
  });
});

describe('runPosthoc on a broken estimate', () => {
  it('refuses an Omega that is not positive definite with a message saying what to do', () => {
    const model = compileModel(interceptSpec, interceptData([[9, 10], [12, 11]]), { structuralModel: interceptModel });
    const bad = { ...model.initial, omega: Float64Array.from([-1]) };
    expect(() => runPosthoc(model, bad)).toThrow(PosthocError);
    expect(() => runPosthoc(model, bad)).toThrow(/Omega is not positive definite.*refit/);
  });
});
