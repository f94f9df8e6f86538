/**
 * Simulation checks of the post-fit steps on data simulated from the model (invented data,
 * labelled: engine/posthoc/simulateData.ts). Expected behaviour is the theory of each method:
 * NPDE ~ N(0, 1) under the true model (Brendel et al. 2006; Comets, Brendel & Mentre 2008, whose
 * tests are applied at 5 %), VPC observed percentiles inside their 90 % prediction intervals
 * at about the nominal rate, Wald 95 % intervals covering the truth at about 95 %, and shrinkage
 * near 0 with rich data and high with sparse data (Savic & Karlsson 2009).
 */
import { describe, expect, it } from 'vitest';
import { createDataset, type SubjectInput } from '../../../engine/data/dataset.js';
import type { Dataset } from '../../../engine/data/types.js';
import { conditionalDistribution, etaShrinkage } from '../../../engine/posthoc/conditional.js';
import { buildDensity } from '../../../engine/posthoc/density.js';
import { computeDiagnostics, type VpcData } from '../../../engine/posthoc/diagnostics.js';
import { runPosthoc } from '../../../engine/posthoc/index.js';
import { conditionalModes } from '../../../engine/posthoc/modes.js';
import { parameterLayout, toWorking } from '../../../engine/posthoc/parameters.js';
import { simulateDataset } from '../../../engine/posthoc/simulateData.js';
import { createStreams } from '../../../engine/rng/index.js';
import { runSaem } from '../../../engine/saem/saem.js';
import { parseModelSpec } from '../../../engine/spec/modelSpec.js';
import { compileModel } from '../../../engine/stats/model.js';

/** Template design: one dose at 0, levels at the given times (values are placeholders). */
function design(n: number, route: 'oral' | 'bolus', times: (i: number) => number[]): Dataset {
  const inputs: SubjectInput[] = [];
  for (let i = 0; i < n; i++)
    inputs.push({ id: `S${i + 1}`, doses: [{ timeH: 0, amountMg: 100, route, durationH: 0 }], observations: times(i).map((t) => ({ timeH: t, valueMgL: 1, censored: false })) });
  return createDataset(inputs);
}

const oralSpec = parseModelSpec({
  structure: '1cmt',
  parameters: { CL: { typical: 2, bsv: 0.3 }, V: { typical: 20, bsv: 0.2 }, ka: { typical: 1, bsv: 0.4 } },
  residual: { model: 'proportional', b: 0.15 },
});
const RICH = [0.5, 1, 2, 3, 4, 6, 8, 12, 16, 24];

function coverage(v: VpcData): number {
  let inside = 0, total = 0;
  for (const b of v.bins)
    for (const key of ['p5', 'p50', 'p95'] as const) {
      const o = b.observed[key];
      const s = b.simulated[key];
      if (o === null || s.lo === null || s.hi === null) continue;
      total++;
      if (o >= s.lo && o <= s.hi) inside++;
    }
  return inside / total;
}

describe('NPDE and VPC on data simulated from the true model (simulated, labelled)', () => {
  for (const [label, lloq] of [['all levels quantified', undefined], ['levels below an LLOQ of 0.6 mg/L censored', 0.6]] as const) {
    it(`${label}: NPDE tests pass at 5 % and the VPC covers at about the nominal rate`, () => {
      const data = simulateDataset(oralSpec, design(60, 'oral', () => RICH), { seed: lloq ? 5 : 4, ...(lloq ? { lloqMgL: lloq } : {}) });
      const model = compileModel(oralSpec, data);
      if (lloq) expect(model.nCensoredTotal).toBeGreaterThan(30);
      const density = buildDensity(model, model.initial)!;
      const diag = computeDiagnostics(density, conditionalModes(density), { seed: 9, replicates: 500 });
      const t = diag.npde.tests!;
      expect(t.n).toBe(600);
      // Comets, Brendel & Mentre 2008: mean, variance and normality tests and the global test at 5 %.
      expect(t.meanTest.pValue).toBeGreaterThan(0.05);
      expect(t.varianceTest.pValue).toBeGreaterThan(0.05);
      expect(t.normalityTest.pValue).toBeGreaterThan(0.05);
      expect(t.globalTest.pValue).toBeGreaterThan(0.05);
      expect(Math.abs(t.mean)).toBeLessThan(0.12);
      expect(Math.abs(t.variance - 1)).toBeLessThan(0.15);
      // 90 % prediction intervals: about 90 % of the observed percentiles inside (8 bins x 3).
      expect(coverage(diag.vpc)).toBeGreaterThanOrEqual(0.75);
      expect(coverage(diag.pcVpc)).toBeGreaterThanOrEqual(0.75);
      if (lloq) {
        let inside = 0;
        for (const b of diag.vpc.bins) {
          const s = b.censoredFraction.simulated;
          if (b.censoredFraction.observed >= s.lo! - 1e-12 && b.censoredFraction.observed <= s.hi! + 1e-12) inside++;
        }
        expect(inside / diag.vpc.bins.length).toBeGreaterThanOrEqual(0.75);
        expect(diag.observations.filter((o) => o.censored).every((o) => o.imputed !== undefined && o.imputed < lloq)).toBe(true);
        // Louis' formula takes the censored likelihood P(Y < LLOQ) through finite differences.
        const ph = runPosthoc(model, model.initial, { seed: 3, diagnostics: false, importance: { samplesPerSubject: 1000 } });
        expect(ph.standardErrors.ok).toBe(true);
        expect(ph.standardErrors.se.every((x) => x !== null && x > 0)).toBe(true);
        expect(ph.warnings.join(' ')).toMatch(/level\(s\) below the LLOQ are left out of the linearised likelihood/);
      }
      expect(diag.epsilonShrinkage!).toBeLessThan(0.2);
    });
  }
});

describe('shrinkage: near 0 with rich data, high with sparse data (simulated, labelled)', () => {
  const shrink = (times: (i: number) => number[], seed: number) => {
    const data = simulateDataset(oralSpec, design(80, 'oral', times), { seed });
    const model = compileModel(oralSpec, data);
    const density = buildDensity(model, model.initial)!;
    const modes = conditionalModes(density);
    return etaShrinkage(density, modes, conditionalDistribution(density, modes, { seed, maxIterations: 1000 }));
  };
  it('10 levels per subject: eta-shrinkage below 0.1 on average and 0.2 for every parameter; one level per subject: above 0.2 for every parameter, above 0.5 on average', () => {
    const rich = shrink(() => RICH, 1);
    const rng = createStreams(2).stream('times');
    const sparse = shrink(() => [0.5 + 23.5 * rng.uniform()], 2);
    // A single late level still says much about CL, so its shrinkage is the lowest of the three.
    expect((sparse.etaSd[0] + sparse.etaSd[1] + sparse.etaSd[2]) / 3).toBeGreaterThan(0.5);
    expect((rich.etaSd[0] + rich.etaSd[1] + rich.etaSd[2]) / 3).toBeLessThan(0.1);
    for (let k = 0; k < 3; k++) {
      expect(rich.etaSd[k]).toBeLessThan(0.2);
      expect(sparse.etaSd[k]).toBeGreaterThan(0.2);
      expect(sparse.etaVariance[k]).toBeGreaterThan(rich.etaVariance[k]);
    }
  });
});

describe("Louis' formula and the linearisation agree on a richer model (simulated, labelled)", () => {
  it('correlated BSV block, a parameter without BSV, a covariate and combined error: both informations invertible, SEs within 10 % (measured: within 2 %)', () => {
    const spec = parseModelSpec({
      structure: '1cmt',
      parameters: { CL: { typical: 2, bsv: 0.3 }, V: { typical: 20, bsv: 0.2 }, ka: { typical: 1, bsv: null } },
      correlations: [['CL', 'V']],
      correlationValues: { 'CL,V': 0.5 },
      covariates: [{ parameter: 'CL', covariate: 'weight_kg', relation: 'power', reference: 70, coefficient: 0.75 }],
      residual: { model: 'combined', a: 0.05, b: 0.12 },
    });
    const rng = createStreams(3).stream('weights');
    const base = design(80, 'oral', () => RICH);
    const template = createDataset(
      base.subjects.map((x) => ({ id: x.id, covariates: { weight_kg: Math.round(50 + 50 * rng.uniform()) }, doses: [...x.doses], observations: [...x.observations] })),
      ['weight_kg'],
    );
    const data = simulateDataset(spec, template, { seed: 8 });
    const model = compileModel(spec, data);
    const r = runPosthoc(model, model.initial, { seed: 2, diagnostics: false, importance: { samplesPerSubject: 1000 } });
    expect(r.layout.entries.map((e) => e.kind)).toEqual(['typical', 'typical', 'typical', 'covariate', 'bsv', 'bsv', 'correlation', 'residual', 'residual']);
    expect(r.standardErrors.ok).toBe(true);
    expect(r.standardErrorsLinearised!.ok).toBe(true);
    r.layout.entries.forEach((e, q) => {
      const a = r.standardErrors.se[q]!;
      const b = r.standardErrorsLinearised!.se[q]!;
      expect(Math.abs(a / b - 1), e.label).toBeLessThan(0.1);
    });
  });
});

describe('95 % Wald intervals from the SEs cover the truth (simulated, labelled)', () => {
  it('over 40 replicates x 5 parameters, coverage lies in 90-98 % (Louis)', async () => {
    const spec = parseModelSpec({
      structure: '1cmt',
      parameters: { CL: { typical: 2, bsv: 0.3 }, V: { typical: 20, bsv: 0.25 } },
      residual: { model: 'proportional', b: 0.1 },
      estimation: { searchMinIterations: 60, searchMaxIterations: 150, averagingIterations: 100, chains: 2 },
    });
    const template = design(30, 'bolus', () => [0.25, 1, 2, 4, 8, 12]);
    const truthModel = compileModel(spec, template);
    const layout = parameterLayout(truthModel);
    const truth = toWorking(truthModel, layout, truthModel.initial);
    let inside = 0, total = 0;
    for (let rep = 0; rep < 40; rep++) {
      const data = simulateDataset(spec, template, { seed: 100 + rep });
      const model = compileModel(spec, data);
      const fit = await runSaem(model, { seed: rep + 1 });
      const r = runPosthoc(model, fit.theta, { seed: rep, startPhi: fit.individualPhiMean, diagnostics: false, linearisedSe: false, importance: { samplesPerSubject: 200 }, conditional: { maxIterations: 1000, keepDraws: 100 } });
      const w = toWorking(model, layout, fit.theta);
      for (const q of layout.estimated) {
        const se = r.standardErrors.seWorking[q];
        expect(se).not.toBeNull();
        total++;
        // 1.959964 = the standard normal 97.5 % quantile (any statistics table; common practice).
        if (Math.abs(w[q] - truth[q]) <= 1.959964 * se!) inside++;
      }
    }
    expect(total).toBe(200);
    expect(inside / total).toBeGreaterThanOrEqual(0.9);
    expect(inside / total).toBeLessThanOrEqual(0.98);
  }, 170_000);
});
