/**
 * Exposure away from steady state (engine/dosing/transient.ts) against the one-compartment bolus
 * equations (C = D/V e^(-k t), AUC from t1 to t2 = D/CL (e^(-k t1) - e^(-k t2)), accumulation
 * ratio 1 / (1 - e^(-k tau)); textbook pharmacokinetics, e.g. Gibaldi & Perrier 1982, from
 * memory), and the superposition path against direct solution of the whole dose history.
 */
import { describe, expect, it } from 'vitest';
import type { Dose } from '../../../engine/data/types.js';
import { getStructuralModel } from '../../../engine/models/catalogue.js';
import { parseTarget } from '../../../engine/dosing/targets.js';
import { earlyToxicity, exposureNow, loadingDoseAtMap } from '../../../engine/dosing/transient.js';

const model = getStructuralModel('1cmt');
const params = (cl: number, v: number) => Float64Array.from([cl, v, Number.NaN, 0, 1]);
const target = parseTarget({ id: 't', label: 't', source: 'test (invented)', goals: [{ metric: 'auc24', min: 400, max: 600 }], toxic: [{ metric: 'auc24', max: 600 }, { metric: 'trough', max: 20 }] });

describe('exposure now from the dose history', () => {
  it('one 1000 mg bolus, CL 5 L/h, V 50 L: AUC, level and highest level over the 24 h before the next dose', () => {
    const draws = new Float64Array([...params(5, 50), ...params(5, 50), ...params(5, 50)]);
    const history: Dose[] = [{ timeH: 0, amountMg: 1000, route: 'bolus', durationH: 0 }];
    const now = exposureNow(model, draws, 3, history, 36, target);
    const k = 0.1;
    expect(now.auc24.median).toBeCloseTo((1000 / 5) * (Math.exp(-k * 12) - Math.exp(-k * 36)), 1);
    expect(now.levelAtNextDose.median).toBeCloseTo(20 * Math.exp(-k * 36), 3);
    expect(now.highest.median).toBeCloseTo(20 * Math.exp(-k * 12), 3);
    expect(now.pToxic).toBe(0);
  });
});

describe('loading dose at the most likely parameters', () => {
  it('no drug on board: the accumulation ratio 1 / (1 - e^(-k tau)), rounded to the strength', () => {
    const history: Dose[] = [{ timeH: 0, amountMg: 1, route: 'bolus', durationH: 0 }];
    const d = loadingDoseAtMap(model, params(5, 50), history, 500, { doseMg: 1000, intervalH: 12, durationH: 0, route: 'bolus' }, 250, 3000);
    const ratio = 1 / (1 - Math.exp(-1.2));
    expect(d.steadyPeakMgL).toBeCloseTo(20 * ratio, 1);
    expect(d.loadingDoseMg).toBe(Math.round((1000 * ratio) / 250) * 250);
    expect(d.firstPeakMgL).toBeCloseTo(d.loadingDoseMg! / 50, 1);
  });

  it('drug on board at steady state: no loading dose', () => {
    const history: Dose[] = Array.from({ length: 10 }, (_, i) => ({ timeH: 12 * i, amountMg: 1000, route: 'bolus' as const, durationH: 0 }));
    const d = loadingDoseAtMap(model, params(5, 50), history, 120, { doseMg: 1000, intervalH: 12, durationH: 0, route: 'bolus' }, 250, 3000);
    expect(d.loadingDoseMg).toBeUndefined();
    expect(d.reason).toMatch(/^no loading dose/);
  });
});

describe('first-interval toxicity', () => {
  it('superposition (dose-linear path) equals solving the whole history per regimen', () => {
    const n = 200;
    const draws = new Float64Array(n * 5);
    for (let d = 0; d < n; d++) draws.set(params(2 + (6 * d) / n, 30 + ((d * 37) % 50)), d * 5);
    const history: Dose[] = [0, 12, 24, 36].map((t) => ({ timeH: t, amountMg: 1250, route: 'infusion' as const, durationH: 1.5 }));
    const regimens = [
      { doseMg: 750, intervalH: 12, durationH: 1, route: 'infusion' as const },
      { doseMg: 1500, intervalH: 24, durationH: 1.5, route: 'infusion' as const },
      { doseMg: 750, intervalH: 12, durationH: 1, route: 'infusion' as const, loadingDoseMg: 2000 },
    ];
    const none = regimens.map(() => new Uint8Array(n));
    const input = { model, draws, nDraws: n, history, startH: 48, target, threshold: Number.NaN };
    const linear = earlyToxicity(input, regimens, none);
    const direct = earlyToxicity({ ...input, model: { ...model, analytic: false } }, regimens, none);
    linear.forEach((r, i) => expect(Math.abs(r.pToxicEarly - direct[i].pToxicEarly)).toBeLessThanOrEqual(1 / n));
    // The loading dose adds toxicity in the first intervals.
    expect(linear[2].pToxicEarly).toBeGreaterThan(linear[0].pToxicEarly);
  });
});
