/**
 * SIMULATION RECOVERY (invented data, labelled as such) for the parts of the M-step without
 * sufficient statistics: a parameter without BSV (ka), combined residual error (a, b), and
 * log-additive error. One moderately rich dataset each; the truth must be recovered within the
 * precision such a dataset carries.
 */
import { describe, expect, it } from 'vitest';
import type { Dose } from '../../../engine/data/types.js';
import { runSaem } from '../../../engine/saem/saem.js';
import { parseModelSpec } from '../../../engine/spec/modelSpec.js';
import { compileModel } from '../../../engine/stats/model.js';
import { simulateDataset, type SimSubjectDesign } from '../../unit/saem/simulate.js';

const designs: SimSubjectDesign[] = Array.from({ length: 80 }, (_, i) => ({
  id: `S${i + 1}`,
  covariates: {},
  doses: [{ timeH: 0, amountMg: 500, route: 'oral', durationH: 0 } as Dose, { timeH: 12, amountMg: 500, route: 'oral', durationH: 0 } as Dose],
  timesH: [0.5, 1, 2, 4, 8, 13, 16, 24],
}));
const rel = (x: number, y: number) => Math.abs(x / y - 1);
const settings = { searchMinIterations: 100, searchMaxIterations: 300, averagingIterations: 150 };

describe('numerical M-step (simulation, invented data)', () => {
  it('recovers ka without BSV and combined error (a, b)', async () => {
    const truth = parseModelSpec({
      structure: '1cmt',
      parameters: { CL: { typical: 5, bsv: 0.3 }, V: { typical: 50, bsv: 0.25 }, ka: { typical: 1.2, bsv: null } },
      residual: { model: 'combined', a: 0.2, b: 0.1 },
    });
    const data = simulateDataset(truth, designs, 99);
    const start = parseModelSpec({
      structure: '1cmt',
      parameters: { CL: { typical: 3, bsv: 0.5 }, V: { typical: 80, bsv: 0.5 }, ka: { typical: 0.5, bsv: null } },
      residual: { model: 'combined', a: 1, b: 0.3 },
    });
    const r = await runSaem(compileModel(start, data), { seed: 4, settings });
    const e = (n: string) => r.estimates[r.estimateNames.indexOf(n)];
    expect(rel(e('ka'), 1.2)).toBeLessThan(0.08);
    expect(rel(e('CL'), 5)).toBeLessThan(0.08);
    expect(rel(e('V'), 50)).toBeLessThan(0.08);
    expect(rel(e('residual_additive_mg_L'), 0.2)).toBeLessThan(0.25);
    expect(rel(e('residual_proportional'), 0.1)).toBeLessThan(0.15);
    expect(r.warnings).toEqual([]);
  });

  it('recovers log-additive error', async () => {
    const truth = parseModelSpec({
      structure: '1cmt',
      parameters: { CL: { typical: 5, bsv: 0.3 }, V: { typical: 50, bsv: 0.25 }, ka: { typical: 1.2, bsv: 0.4 } },
      residual: { model: 'log-additive', a: 0.15 },
    });
    const data = simulateDataset(truth, designs, 7);
    const start = parseModelSpec({ ...truth, parameters: { CL: { typical: 8, bsv: 0.5 }, V: { typical: 30, bsv: 0.5 }, ka: { typical: 2, bsv: 0.5 } }, residual: { model: 'log-additive', a: 0.5 } });
    const r = await runSaem(compileModel(start, data), { seed: 4, settings });
    const e = (n: string) => r.estimates[r.estimateNames.indexOf(n)];
    expect(rel(e('CL'), 5)).toBeLessThan(0.08);
    expect(rel(e('ka'), 1.2)).toBeLessThan(0.1);
    expect(rel(e('residual_log_sd'), 0.15)).toBeLessThan(0.1);
    expect(rel(e('bsv_CL'), 0.3)).toBeLessThan(0.2);
  });
});
