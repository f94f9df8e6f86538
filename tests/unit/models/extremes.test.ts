/**
 * Extreme parameters and histories: a predictor either returns false (NaN-filled) or finite,
 * non-negative levels; it never throws inside the hot loop. Values are generated (no outside
 * reference); the point is robustness, not accuracy.
 */
import { describe, expect, it } from 'vitest';
import type { Dose } from '../../../engine/data/types.js';
import { listStructuralModels } from '../../../engine/models/catalogue.js';

function lcg(seed: number): () => number {
  let x = seed;
  return () => {
    x = (x * 48271) % 2147483647;
    return x / 2147483647;
  };
}

const HISTORY: Dose[] = [
  { timeH: 0, amountMg: 1000, route: 'bolus', durationH: 0 },
  { timeH: 0, amountMg: 500, route: 'oral', durationH: 0, steadyStateIntervalH: 12 },
  { timeH: 3, amountMg: 800, route: 'infusion', durationH: 4 },
  { timeH: 12, amountMg: 1e-6, route: 'oral', durationH: 0 },
  { timeH: 24, amountMg: 5e4, route: 'infusion', durationH: 1e-6 },
  { timeH: 1000, amountMg: 300, route: 'bolus', durationH: 0, steadyStateIntervalH: 8 },
];
const TIMES = [0, 1e-9, 0.5, 3, 7, 12, 24, 24 + 1e-7, 100, 1000, 1000.5, 5000];

describe('extreme parameters never break a predictor', () => {
  for (const model of listStructuralModels()) {
    it(`${model.id}: 300 draws over 16 orders of magnitude`, () => {
      const rand = lcg(12345 + model.id.length);
      const predict = model.prepare(HISTORY, TIMES, { maxSteps: 20_000 });
      const out = new Float64Array(TIMES.length);
      const draws = model.id === '1cmt-mm' ? 60 : 300;
      let accepted = 0;
      for (let d = 0; d < draws; d++) {
        const p = Float64Array.from(model.parameters, (info) =>
          info.name === 'tlag' ? (rand() < 0.2 ? 0 : 10 ** (rand() * 6 - 4)) : 10 ** (rand() * 16 - 8),
        );
        let ok = false;
        expect(() => (ok = predict(p, out))).not.toThrow();
        if (ok) {
          accepted++;
          for (const c of out) expect(Number.isFinite(c) && c >= 0, `${model.id} ${p}`).toBe(true);
        } else for (const c of out) expect(Number.isNaN(c)).toBe(true);
      }
      if (model.analytic) expect(accepted).toBeGreaterThan(draws / 2);
    });
  }
});
