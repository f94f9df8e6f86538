import { describe, expect, it } from 'vitest';
import type { Dose } from '../../../engine/data/types.js';
import { getStructuralModel } from '../../../engine/models/catalogue.js';

const bolus = (timeH: number, amountMg: number, ss?: number): Dose => ({ timeH, amountMg, route: 'bolus', durationH: 0, ...(ss ? { steadyStateIntervalH: ss } : {}) });
const inf = (timeH: number, amountMg: number, durationH: number, ss?: number): Dose => ({ timeH, amountMg, route: 'infusion', durationH, ...(ss ? { steadyStateIntervalH: ss } : {}) });
const oral = (timeH: number, amountMg: number, ss?: number): Dose => ({ timeH, amountMg, route: 'oral', durationH: 0, ...(ss ? { steadyStateIntervalH: ss } : {}) });

function predict(id: '1cmt' | '2cmt' | '3cmt' | '1cmt-mm', doses: Dose[], times: number[], params: number[]): Float64Array {
  const m = getStructuralModel(id);
  const p = m.prepare(doses, times);
  const out = new Float64Array(times.length);
  expect(p(Float64Array.from(params), out)).toBe(true);
  return out;
}
const rel = (a: number, b: number) => Math.abs(a - b) / Math.max(Math.abs(b), 1e-300);

describe('1cmt closed forms', () => {
  const CL = 4, V = 50, k = CL / V;
  it('IV bolus: C = D/V exp(-k t)', () => {
    // Gibaldi & Perrier, Pharmacokinetics 2nd ed. 1982, ch. 1 (one-compartment IV bolus) (from memory)
    const times = [0.5, 1, 2, 6, 12, 24, 48];
    const c = predict('1cmt', [bolus(0, 1000)], times, [CL, V, NaN, NaN, NaN]);
    times.forEach((t, i) => expect(rel(c[i], (1000 / V) * Math.exp(-k * t))).toBeLessThan(1e-13));
  });
  it('oral: Bateman function with lag and F', () => {
    // Gibaldi & Perrier 1982, ch. 1 (first-order absorption): C = F D ka / (V (ka - k)) (e^{-k t'} - e^{-ka t'}), t' = t - tlag (from memory)
    const ka = 1.3, tlag = 0.4, F = 0.7, D = 500;
    const times = [0.2, 0.4, 0.5, 1, 3, 8, 24];
    const c = predict('1cmt', [oral(0, D)], times, [CL, V, ka, tlag, F]);
    times.forEach((t, i) => {
      const tp = t - tlag;
      const ref = tp <= 0 ? 0 : ((F * D * ka) / (V * (ka - k))) * (Math.exp(-k * tp) - Math.exp(-ka * tp));
      if (ref === 0) expect(c[i]).toBe(0);
      else expect(rel(c[i], ref)).toBeLessThan(1e-12);
    });
  });
});

