import { describe, expect, it } from 'vitest';
import { evaluateRegimen, evaluateRegimens, formatRegimen, parseRegimen, rankRegimens, RegimenParseError, regimenGrid, type RegimenResult } from '../../../engine/dosing/regimens.js';
import { bandOf, quantileSorted } from '../../../engine/dosing/summary.js';
import { createStreams } from '../../../engine/rng/index.js';
import { getStructuralModel } from '../../../engine/models/catalogue.js';
import { parseTarget } from '../../../engine/dosing/targets.js';

describe('parseRegimen (--evaluate)', () => {
  it('reads dose, interval, infusion duration and a loading dose', () => {
    expect(parseRegimen('1000mg q12h 1h')).toEqual({ doseMg: 1000, intervalH: 12, durationH: 1, route: 'infusion' });
    expect(parseRegimen('1 g q24h over 30 min')).toEqual({ doseMg: 1000, intervalH: 24, durationH: 0.5, route: 'infusion' });
    expect(parseRegimen('load 2000mg then 1250 mg q8h 2h')).toEqual({ doseMg: 1250, intervalH: 8, durationH: 2, route: 'infusion', loadingDoseMg: 2000 });
    expect(parseRegimen('500 mg every 6 hours bolus')).toEqual({ doseMg: 500, intervalH: 6, durationH: 0, route: 'bolus' });
    expect(parseRegimen('250mg q12h oral').route).toBe('oral');
  });

  it('refuses what it cannot read, saying what is missing', () => {
    expect(() => parseRegimen('1000 q12h 1h')).toThrow(/dose amount/);
    expect(() => parseRegimen('1000mg 1h')).toThrow(/interval/);
    expect(() => parseRegimen('1000mg q12h')).toThrow(/duration/);
    expect(() => parseRegimen('1000mg q12h 13h')).toThrow(/shorter than the interval/);
    expect(() => parseRegimen('1000mg q12h 1h please')).toThrow(RegimenParseError);
  });

  it('formats regimens in plain words', () => {
    expect(formatRegimen(parseRegimen('ld 2g 1000mg q12h 30min'))).toBe('loading dose 2000 mg, then 1000 mg every 12 h over 30 min');
  });
});

describe('regimenGrid', () => {
  it('rounds doses to the strength within min/max and applies the rate and daily limits', () => {
    const g = regimenGrid({ strengthMg: 250, minDoseMg: 600, maxDoseMg: 1500, intervalsH: [12, 24], durationsH: [1, 2], maxRateMgPerH: 1000, maxDailyDoseMg: 2500 });
    expect(new Set(g.map((r) => r.doseMg))).toEqual(new Set([750, 1000, 1250, 1500]));
    for (const r of g) {
      expect(r.doseMg / r.durationH).toBeLessThanOrEqual(1000);
      expect((r.doseMg * 24) / r.intervalH).toBeLessThanOrEqual(2500);
    }
    // The shortest duration the rate allows: 1250 mg -> 2 h; 1000 mg -> 1 h.
    expect(g.find((r) => r.doseMg === 1250)?.durationH).toBe(2);
    expect(g.find((r) => r.doseMg === 1000)?.durationH).toBe(1);
    expect(g.some((r) => r.doseMg === 1500 && r.intervalH === 12)).toBe(false);
  });
});

describe('rankRegimens', () => {
  const r = (doseMg: number, intervalH: number, pTarget: number, pToxic: number): RegimenResult => ({ doseMg, intervalH, durationH: 1, route: 'infusion', dailyDoseMg: (doseMg * 24) / intervalH, pTarget, pToxic, metrics: {}, failedDraws: 0 });
  it('puts the highest P(target) - P(toxic) first; within Monte Carlo ties, the current interval, then lower toxicity', () => {
    const ranked = rankRegimens([r(500, 12, 0.5, 0.1), r(1000, 12, 0.8, 0.3), r(750, 12, 0.7, 0.05), r(1500, 24, 0.705, 0.05), r(2000, 48, 0.905, 0.1), r(250, 12, 0.705, 0.06)], { preferIntervalH: 12 });
    expect(ranked.map((x) => [x.doseMg, x.intervalH])).toEqual([
      [2000, 48],
      [750, 12],
      [250, 12],
      [1500, 24],
      [1000, 12],
      [500, 12],
    ]);
  });
});

describe('rankRegimens within a tie band', () => {
  it('prefers the median nearest the centre of a two-sided target range', () => {
    const m = (doseMg: number, median: number): RegimenResult => ({ doseMg, intervalH: 12, durationH: 1, route: 'infusion', dailyDoseMg: 2 * doseMg, pTarget: 0.9, pToxic: 0.05, metrics: { auc24: { median, mean: median, q025: 0, q10: 0, q90: 0, q975: 0 } }, failedDraws: 0 });
    const ranked = rankRegimens([m(750, 430), m(1000, 520), m(1250, 580)], { preferIntervalH: 12, goalCentre: { metric: 'auc24', value: Math.sqrt(400 * 600) } });
    // Centre sqrt(400 x 600) = 490: |log(520/490)| < |log(430/490)| < |log(580/490)|.
    expect(ranked.map((x) => x.doseMg)).toEqual([1000, 750, 1250]);
  });
});

describe('bandOf', () => {
  it('gives the same quantiles as a full sort (type 7), ties and NaNs included', () => {
    const rng = createStreams(3).stream('band');
    for (const n of [1, 2, 7, 100, 2001]) {
      const v = new Float64Array(n);
      for (let i = 0; i < n; i++) v[i] = i % 5 === 0 ? 1 : Math.exp(rng.normal());
      if (n > 10) v[3] = NaN;
      const finite = Float64Array.from(Array.from(v).filter(Number.isFinite)).sort();
      const b = bandOf(v, new Float64Array(n));
      expect(b.median).toBe(quantileSorted(finite, 0.5));
      expect(b.q025).toBe(quantileSorted(finite, 0.025));
      expect(b.q10).toBe(quantileSorted(finite, 0.1));
      expect(b.q90).toBe(quantileSorted(finite, 0.9));
      expect(b.q975).toBe(quantileSorted(finite, 0.975));
    }
  });
});

describe('evaluateRegimens', () => {
  it('the unit-dose superposition path gives the same table as evaluating each regimen directly', () => {
    const model = getStructuralModel('2cmt');
    const rng = createStreams(9).stream('draws');
    const nDraws = 300;
    const nP = model.parameterOrder.length;
    const draws = new Float64Array(nDraws * nP);
    for (let d = 0; d < nDraws; d++) {
      const typical = [4, 20, 5, 40];
      typical.forEach((t, j) => (draws[d * nP + j] = t * Math.exp(0.3 * rng.normal())));
      draws[d * nP + 4] = NaN;
      draws[d * nP + 5] = 0;
      draws[d * nP + 6] = 1;
    }
    const target = parseTarget({ id: 't', label: 't', source: 'test', micMgL: 4, peakDelayH: 0.5, goals: [{ metric: 'ftAbove', min: 60 }, { metric: 'auc24', min: 300 }], toxic: [{ metric: 'trough', max: 10 }] });
    const regimens = regimenGrid({ strengthMg: 500, minDoseMg: 500, maxDoseMg: 2000, intervalsH: [8, 12], durationsH: [0.5, 3] });
    const input = { model, draws, nDraws, target };
    const fast = evaluateRegimens(input, regimens);
    regimens.forEach((r, i) => {
      const direct = evaluateRegimen(input, r);
      expect(fast[i].pTarget).toBeCloseTo(direct.pTarget, 12);
      expect(fast[i].pToxic).toBeCloseTo(direct.pToxic as number, 12);
      for (const id of ['auc24', 'trough', 'peak', 'peakAt', 'ftAbove'] as const) {
        const a = fast[i].metrics[id]!;
        const b = direct.metrics[id]!;
        for (const k of ['median', 'q025', 'q975'] as const) expect(Math.abs(a[k] - b[k])).toBeLessThanOrEqual(1e-3 * Math.abs(b[k]) + 1e-9);
      }
    });
  });
});
