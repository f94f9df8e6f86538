/** Simulation with variability: seeded draws recover the spec's BSV, correlation and residual SD (invented spec, simulation check). */
import { describe, expect, it } from 'vitest';
import { createDataset } from '../../../engine/data/dataset.js';
import { parseModelSpec } from '../../../engine/spec/modelSpec.js';
import { gridTimes, parseTimeGrid, simulateDataset } from '../../../main/cli/simulation.js';

describe('simulateDataset with variability', () => {
  const spec = parseModelSpec({
    structure: '1cmt',
    parameters: { CL: { typical: 4, bsv: 0.3 }, V: { typical: 50, bsv: 0.2 } },
    correlations: [['CL', 'V']],
    correlationValues: { 'CL,V': 0.4 },
    residual: { model: 'proportional', b: 0.1 },
  });
  const n = 3000;
  const dataset = createDataset(
    Array.from({ length: n }, (_, i) => ({
      id: `S${i}`,
      doses: [{ timeH: 0, amountMg: 1000, route: 'bolus' as const, durationH: 0 }],
      observations: [{ timeH: 6, valueMgL: 1, censored: false }],
    })),
  );

  it('log CL and log V have the spec SDs and correlation; residuals have SD b', () => {
    const r = simulateDataset(spec, dataset, { variability: true, seed: 7 });
    const lc = r.subjects.map((s) => Math.log(s.parameters.CL / 4));
    const lv = r.subjects.map((s) => Math.log(s.parameters.V / 50));
    const mean = (x: number[]) => x.reduce((a, b) => a + b, 0) / x.length;
    const sd = (x: number[]) => Math.sqrt(mean(x.map((v) => (v - mean(x)) ** 2)));
    const corr = mean(lc.map((c, i) => (c - mean(lc)) * (lv[i] - mean(lv)))) / (sd(lc) * sd(lv));
    // Sampling SD of an SD estimate ~ sigma / sqrt(2n); of a correlation ~ (1 - r^2) / sqrt(n) (common practice); bounds at 5 SD.
    expect(Math.abs(sd(lc) - 0.3)).toBeLessThan((5 * 0.3) / Math.sqrt(2 * n));
    expect(Math.abs(sd(lv) - 0.2)).toBeLessThan((5 * 0.2) / Math.sqrt(2 * n));
    expect(Math.abs(corr - 0.4)).toBeLessThan((5 * (1 - 0.16)) / Math.sqrt(n));
    const rel = r.subjects.map((s) => s.simulatedMgL![0] / s.predictedMgL[0] - 1);
    expect(Math.abs(sd(rel) - 0.1)).toBeLessThan((5 * 0.1) / Math.sqrt(2 * n));
    // Same seed, same draws; the typical run has none.
    const again = simulateDataset(spec, dataset, { variability: true, seed: 7 });
    expect(again.subjects[123].parameters).toEqual(r.subjects[123].parameters);
    expect(simulateDataset(spec, dataset).subjects[5].parameters).toEqual({ CL: 4, V: 50 });
  });

  it('levels drawn below their LLOQ come out censored at the LLOQ', () => {
    const low = createDataset([{ id: 'L', doses: [{ timeH: 0, amountMg: 1, route: 'bolus', durationH: 0 }], observations: [{ timeH: 200, valueMgL: 1, censored: false, lloqMgL: 0.5 }] }]);
    const r = simulateDataset(spec, low, { variability: true, seed: 1 });
    expect(r.output.subjects[0].observations[0]).toMatchObject({ censored: true, valueMgL: 0.5 });
  });

  it('an invalid correlation matrix is a spec error', () => {
    const bad = parseModelSpec({
      structure: '2cmt',
      parameters: { CL: { typical: 4, bsv: 0.3 }, V1: { typical: 20, bsv: 0.3 }, Q: { typical: 5, bsv: 0.3 }, V2: { typical: 40 } },
      correlations: [['CL', 'V1', 'Q']],
      correlationValues: { 'CL,V1': 0.95, 'CL,Q': 0.95, 'V1,Q': -0.95 },
      residual: { model: 'additive', a: 1 },
    });
    expect(() => simulateDataset(bad, dataset, { variability: true })).toThrow(/positive-definite/);
  });
});

describe('time grids', () => {
  it('parses start:step:end and builds a drift-free grid', () => {
    const g = gridTimes(parseTimeGrid('0:0.1:3'));
    expect(g.length).toBe(31);
    expect(g[30]).toBe(3);
    expect(g[3]).toBe(0.3);
    expect(gridTimes(parseTimeGrid('2:5:12'))).toEqual(Float64Array.from([2, 7, 12]));
    expect(() => parseTimeGrid('0:1')).toThrow(/start:step:end/);
    expect(() => parseTimeGrid('-1:1:5')).toThrow(/start must be >= 0/);
    expect(() => parseTimeGrid('5:1:2')).toThrow(/before start/);
    expect(() => parseTimeGrid('0:0:2')).toThrow(/step must be > 0/);
  });
});
