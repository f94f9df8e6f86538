/** The chart configurations are pure functions of the records: what each plot shows and leaves out. */
import { describe, expect, it } from 'vitest';
import type { ObservationDiagnostics } from '../../../engine/posthoc/diagnostics.js';
import { convergenceChart, covariateScatter, observedVsPredicted, residualPlot } from '../../../renderer/src/features/results/charts.js';

const obs: ObservationDiagnostics[] = [
  { subject: 'A', timeH: 1, dv: 10, censored: false, pred: 8, ipred: 9.5, iwres: 0.3, npde: 0.1 },
  { subject: 'A', timeH: 12, dv: 2, censored: true, pred: 1.5, ipred: 1.2, iwres: null, npde: -0.4 },
  { subject: 'B', timeH: 2, dv: 0, censored: false, pred: 0.5, ipred: null, iwres: null, npde: null },
];

const points = (c: { data: { datasets: Array<{ data: unknown }> } }, i: number) => c.data.datasets[i].data as Array<{ x: number; y: number }>;

describe('Results chart configurations', () => {
  it('observed vs prediction: censored levels apart, no point without a prediction, none <= 0 on log axes', () => {
    const lin = observedVsPredicted(obs, 'ipred', false);
    expect(points(lin, 0)).toEqual([{ x: 9.5, y: 10 }]);
    expect(points(lin, 1)).toEqual([{ x: 1.2, y: 2 }]);
    const log = observedVsPredicted(obs, 'pred', true);
    expect(points(log, 0)).toEqual([{ x: 8, y: 10 }]);
    expect((log.options?.scales?.x as { type: string }).type).toBe('logarithmic');
  });
  it('residuals: missing values are left out, never drawn as 0', () => {
    expect(points(residualPlot(obs, 'iwres', 'time'), 0)).toEqual([{ x: 1, y: 0.3 }]);
    // Sorted by x: chart.js with parsing off takes the data as sorted (its documented requirement).
    expect(points(residualPlot(obs, 'npde', 'pred'), 0)).toEqual([{ x: 1.5, y: -0.4 }, { x: 8, y: 0.1 }]);
  });
  it('scatter data are sorted by x, so chart.js (parsing off) draws every point over the whole range', () => {
    const c = covariateScatter([{ x: 62, y: 4 }, { x: 85, y: 5 }, { x: 60, y: 3 }, { x: 77, y: 4.5 }], 'CL', 'weight_kg');
    expect(points(c, 0).map((p) => p.x)).toEqual([60, 62, 77, 85]);
  });
  it('convergence: one point per reported iteration, the averaging boundary where it began', () => {
    const c = convergenceChart('CL', [5, 4.5, 4.4], 2, '#000', [10, 20, 30]);
    expect(points(c, 0)).toEqual([{ x: 10, y: 5 }, { x: 20, y: 4.5 }, { x: 30, y: 4.4 }]);
    const ann = (c.options?.plugins as { annotation: { annotations: Record<string, { xMin: number }> } }).annotation.annotations;
    expect(ann.phase.xMin).toBe(2);
  });
});
