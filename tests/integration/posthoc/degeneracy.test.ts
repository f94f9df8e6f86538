/**
 * Collapse detection on SIMULATED data (invented, labelled as simulation): 40 subjects, one IV
 * bolus and 6 levels each, simulated with BSV on CL only (V identical in every subject), fitted
 * with BSV on CL and V. The BSV of V must be reported as collapsed and "not supported by the
 * data" (the levels pin each subject's V closely and show no spread), the fit marked not fit for
 * use as a prior, and the fit still finishes (a finding, not a failure).
 * The check's thresholds are common practice (engine/posthoc/degeneracy.ts).
 */
import { beforeAll, describe, expect, it } from 'vitest';
import type { Dose } from '../../../engine/data/types.js';
import { assessDegeneracy, formatDegeneracy } from '../../../engine/posthoc/degeneracy.js';
import { parseModelSpec } from '../../../engine/spec/modelSpec.js';
import { compileModel } from '../../../engine/stats/model.js';
import { fitDataset } from '../../../main/services/fitService.js';
import { addPosthoc, type PosthocFitRecord } from '../../../main/services/fitPosthoc.js';
import { formatFitSummary } from '../../../engine/saem/fitRecord.js';
import { simulateDataset, type SimSubjectDesign } from '../../unit/saem/simulate.js';

const designs: SimSubjectDesign[] = Array.from({ length: 40 }, (_, i) => ({
  id: `D${i + 1}`,
  covariates: {},
  doses: [{ timeH: 0, amountMg: 500, route: 'bolus', durationH: 0 } as Dose],
  timesH: [0.5, 1, 2, 4, 8, 12],
}));
const truth = parseModelSpec({ structure: '1cmt', parameters: { CL: { typical: 3, bsv: 0.3 }, V: { typical: 30, bsv: null } }, residual: { model: 'proportional', b: 0.08 } });
const data = simulateDataset(truth, designs, 77);
const fitSpec = parseModelSpec({ structure: '1cmt', parameters: { CL: { typical: 2, bsv: 0.4 }, V: { typical: 20, bsv: 0.4 } }, residual: { model: 'proportional', b: 0.2 } });

describe('a BSV simulated as zero is reported as collapsed and not supported by the data (simulation)', () => {
  let record: PosthocFitRecord;
  beforeAll(async () => {
    const outcome = await fitDataset(data, fitSpec, { seed: 3 });
    record = await addPosthoc(outcome, { posthoc: { diagnostics: false, linearisedSe: false } });
  }, 300_000);

  it('names the collapsed BSV of V and says the data do not support it', () => {
    const f = record.degeneracy!.findings.filter((x) => x.code === 'bsv-collapsed');
    expect(f.map((x) => x.parameter)).toEqual(['V']);
    expect(f[0].dataShowNoVariability).toBe(true);
    expect(f[0].message).toMatch(/not supported by the data/);
  });
  it('marks the fit not fit for use as a prior, at the top of the summary and in the warnings (which dose advice blocks on)', () => {
    expect(record.degeneracy!.usableAsPrior).toBe(false);
    expect(formatFitSummary(record).split('\n')[0]).toMatch(/NOT FIT FOR USE AS A PRIOR/);
    expect(record.warnings.some((w) => /do not use this fit as a prior/.test(w))).toBe(true);
  });
  it('keeps CL and its BSV (the fit is a finding, not a failure)', () => {
    const bsvCl = record.population.find((e) => e.kind === 'bsv' && e.parameter === 'CL')!.estimate;
    expect(bsvCl).toBeGreaterThan(0.15);
    expect(record.degeneracy!.findings.some((x) => x.parameter === 'CL')).toBe(false);
  });
});

describe('degeneracy checks on given estimates', () => {
  const model = compileModel(fitSpec, data);
  const base = { mu: Float64Array.from(model.initial.mu), beta: new Float64Array(0), omega: Float64Array.from(model.initial.omega), a: model.initial.a, b: model.initial.b };
  it('a healthy estimate has no findings', () => {
    expect(assessDegeneracy({ model, theta: base, minus2LL: 500 })).toEqual({ usableAsPrior: true, findings: [] });
    expect(formatDegeneracy({ usableAsPrior: true, findings: [] })).toEqual([]);
  });
  it('a collapsed residual error with a negative -2LL, an infinite CV and a typical value at a bound are each named', () => {
    const omega = Float64Array.from(base.omega);
    omega[0] = 2000;
    const mu = Float64Array.from(base.mu);
    mu[1] = -40;
    const r = assessDegeneracy({ model, theta: { ...base, omega, mu, b: 1e-9 }, minus2LL: -120 });
    expect(r.usableAsPrior).toBe(false);
    expect(r.findings.map((f) => f.code).sort()).toEqual(['cv-not-finite', 'estimate-at-bound', 'minus2ll-negative', 'residual-collapsed']);
  });
  it('a -2LL that is not finite is named', () => {
    expect(assessDegeneracy({ model, theta: base, minus2LL: NaN }).findings.map((f) => f.code)).toEqual(['minus2ll-not-finite']);
  });
});
