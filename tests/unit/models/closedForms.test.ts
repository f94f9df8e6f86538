import { describe, expect, it } from 'vitest';
import type { Dose } from '../../../engine/data/types.js';
import { getStructuralModel } from '../../../engine/models/catalogue.js';
import type { StructureId } from '../../../engine/models/types.js';

const bolus = (timeH: number, amountMg: number, ss?: number): Dose => ({ timeH, amountMg, route: 'bolus', durationH: 0, ...(ss ? { steadyStateIntervalH: ss } : {}) });
const inf = (timeH: number, amountMg: number, durationH: number, ss?: number): Dose => ({ timeH, amountMg, route: 'infusion', durationH, ...(ss ? { steadyStateIntervalH: ss } : {}) });
const oral = (timeH: number, amountMg: number, ss?: number): Dose => ({ timeH, amountMg, route: 'oral', durationH: 0, ...(ss ? { steadyStateIntervalH: ss } : {}) });

function predict(id: StructureId, doses: Dose[], times: ArrayLike<number>, params: number[]): Float64Array {
  const p = getStructuralModel(id).prepare(doses, times);
  const out = new Float64Array(times.length);
  expect(p(Float64Array.from(params), out)).toBe(true);
  return out;
}
const relErr = (a: number, b: number) => Math.abs(a - b) / Math.abs(b);

/** Composite Simpson over [a, a + n h] of values f[0..n] (n even). */
function simpson(f: Float64Array, h: number): number {
  let s = f[0] + f[f.length - 1];
  for (let i = 1; i < f.length - 1; i++) s += (i % 2 ? 4 : 2) * f[i];
  return (s * h) / 3;
}

describe('steady-state intermittent infusion, 1cmt', () => {
  // Gibaldi & Perrier, Pharmacokinetics 2nd ed. 1982, ch. 1 (from memory); Rowland & Tozer, Clinical
  // Pharmacokinetics: Css,max = k0/(k V) (1 - e^{-kT}) / (1 - e^{-k tau}), Css,min = Css,max e^{-k (tau - T)}.
  it.each([
    [4, 50, 1000, 1, 12],
    [10, 30, 500, 0.5, 8],
    [0.5, 70, 1500, 2, 24],
  ])('CL %d V %d dose %d over %d h every %d h', (CL, V, D, T, tau) => {
    const k = CL / V;
    const k0 = D / T;
    const cmax = ((k0 / (k * V)) * (1 - Math.exp(-k * T))) / (1 - Math.exp(-k * tau));
    const cmin = cmax * Math.exp(-k * (tau - T));
    const c = predict('1cmt', [inf(10, D, T, tau)], [10, 10 + T, 10 + tau], [CL, V, NaN, NaN, NaN]);
    expect(relErr(c[0], cmin)).toBeLessThan(1e-12); // level at the dose time = pre-dose trough
    expect(relErr(c[1], cmax)).toBeLessThan(1e-12);
    expect(relErr(c[2], cmin)).toBeLessThan(1e-12);
  });
});

describe('continuous infusion at steady state', () => {
  // Gibaldi & Perrier 1982, ch. 2 (constant-rate infusion): Css = k0 / CL (from memory).
  it.each(['1cmt', '2cmt', '3cmt'] as StructureId[])('%s: an infusion as long as its interval holds Css = k0 / CL', (id) => {
    const params = { '1cmt': [4, 50], '2cmt': [4, 20, 5, 40], '3cmt': [4, 15, 8, 30, 2, 60], '1cmt-mm': [] }[id];
    const c = predict(id, [inf(0, 1200, 12, 12)], [0, 3, 11.999], [...params, NaN, NaN, NaN]);
    for (const v of c) expect(relErr(v, 100 / 4)).toBeLessThan(1e-12);
  });
});

describe('AUC over a steady-state interval = F dose / CL', () => {
  // Rowland & Tozer, Clinical Pharmacokinetics (AUC over a dosing interval at steady state equals the single-dose AUC, F Dose / CL) (from memory).
  const tau = 12;
  const n = 2400; // h = 0.005 h; tlag 0.6 h and infusion end 1 h fall on even nodes, so Simpson sees no kink inside a panel
  const h = tau / n;
  const times = Float64Array.from({ length: n + 1 }, (_, i) => 5 + i * h);
  const cases: [StructureId, number[], Dose][] = [
    ['1cmt', [4, 50, 1.1, 0.6, 0.7], oral(5, 400, tau)],
    ['2cmt', [3, 15, 6, 40, 0.9, 0.6, 0.75], oral(5, 400, tau)],
    ['3cmt', [5, 10, 12, 25, 1.5, 80, 1.7, 0.6, 0.9], oral(5, 400, tau)],
    ['2cmt', [3, 15, 6, 40, NaN, NaN, NaN], inf(5, 400, 1, tau)],
    ['3cmt', [5, 10, 12, 25, 1.5, 80, NaN, NaN, NaN], bolus(5, 400, tau)],
  ];
  it.each(cases)('%s %j %j', (id, params, dose) => {
    // A level at the bolus time is pre-dose (the convention); the interval starts just after the dose.
    const grid = Float64Array.from(times);
    if (dose.route === 'bolus') grid[0] += 1e-12;
    const c = predict(id, [dose], grid, params);
    const F = dose.route === 'oral' ? params[params.length - 1] : 1;
    expect(relErr(simpson(c, h), (F * dose.amountMg) / params[0])).toBeLessThan(1e-8);
  });
});

describe('multiple doses vs explicit superposition of single-dose closed forms', () => {
  // 2cmt oral: C = F D ka / V1 sum_i A_i (e^{-l_i t} - e^{-ka t}) / (ka - l_i), A_alpha = (alpha - k21)/(alpha - beta),
  // A_beta = (k21 - beta)/(alpha - beta); alpha, beta = ((k10 + k12 + k21) +/- sqrt((k10 + k12 + k21)^2 - 4 k10 k21)) / 2
  // (Gibaldi & Perrier 1982, ch. 2, from memory). Superposition of doses holds for linear systems.
  it('2cmt oral with lag, irregular doses', () => {
    const [CL, V1, Q, V2, ka, tlag, F] = [3, 15, 6, 40, 0.9, 0.6, 0.75];
    const k10 = CL / V1, k12 = Q / V1, k21 = Q / V2;
    const s = k10 + k12 + k21;
    const disc = Math.sqrt(s * s - 4 * k10 * k21);
    const alpha = (s + disc) / 2, beta = (s - disc) / 2;
    const single = (t: number, D: number): number => {
      if (t <= 0) return 0;
      const term = (l: number, A: number) => (A * (Math.exp(-l * t) - Math.exp(-ka * t))) / (ka - l);
      return ((F * D * ka) / V1) * (term(alpha, (alpha - k21) / (alpha - beta)) + term(beta, (k21 - beta) / (alpha - beta)));
    };
    const doses = [oral(0, 300), oral(7.5, 200), oral(13, 300), oral(26, 500), oral(31, 100)];
    const times = Array.from({ length: 97 }, (_, i) => i * 0.5);
    const c = predict('2cmt', doses, times, [CL, V1, Q, V2, ka, tlag, F]);
    times.forEach((t, i) => {
      const ref = doses.reduce((acc, d) => acc + single(t - d.timeH - tlag, d.amountMg), 0);
      if (ref === 0) expect(c[i]).toBe(0);
      else expect(relErr(c[i], ref)).toBeLessThan(1e-10);
    });
  });
  it('1cmt bolus accumulation: C after n doses = D/V e^{-kt} (1 - e^{-nk tau})/(1 - e^{-k tau})', () => {
    // Gibaldi & Perrier 1982, ch. 3 (multiple dosing, accumulation factor) (from memory).
    const CL = 4, V = 50, k = CL / V, D = 500, tau = 8;
    const doses = Array.from({ length: 10 }, (_, i) => bolus(i * tau, D));
    const times = [9 * tau + 0.5, 9 * tau + 3, 9 * tau + 7.9];
    const c = predict('1cmt', doses, times, [CL, V, NaN, NaN, NaN]);
    times.forEach((t, i) => {
      const tt = t - 9 * tau;
      const ref = ((D / V) * Math.exp(-k * tt) * (1 - Math.exp(-10 * k * tau))) / (1 - Math.exp(-k * tau));
      expect(relErr(c[i], ref)).toBeLessThan(1e-12);
    });
  });
});

describe('absorption rate close to an elimination rate', () => {
  // Gibaldi & Perrier 1982, ch. 1: when ka = k, C = F D k t e^{-kt} / V (limit of the Bateman function) (from memory).
  const CL = 4, V = 50, k = CL / V, D = 500, F = 0.8;
  const times = [0.5, 2, 8, 24, 72];
  const limit = (t: number) => ((F * D * k * t) / V) * Math.exp(-k * t);
  it('ka = k exactly gives the limit form', () => {
    const c = predict('1cmt', [oral(0, D)], times, [CL, V, k, 0, F]);
    times.forEach((t, i) => expect(relErr(c[i], limit(t))).toBeLessThan(1e-13));
  });
  it.each([1e-4, 1e-6, 1e-8, 1e-10, 1e-13])('ka = k (1 + %d) stays within O(delta) of the limit', (delta) => {
    const c = predict('1cmt', [oral(0, D)], times, [CL, V, k * (1 + delta), 0, F]);
    // Exact relative change is about delta (k t - 1) / ... bounded by delta (1 + k t); roundoff must not add more than 1e-14.
    times.forEach((t, i) => expect(relErr(c[i], limit(t))).toBeLessThan(delta * (1 + k * t) + 1e-14));
  });
  it('2cmt with ka equal to the terminal rate beta is finite and continuous', () => {
    const [CL, V1, Q, V2] = [3, 15, 6, 40];
    const k10 = CL / V1, k12 = Q / V1, k21 = Q / V2;
    const s = k10 + k12 + k21;
    const beta = (s - Math.sqrt(s * s - 4 * k10 * k21)) / 2;
    const at = predict('2cmt', [oral(0, D)], times, [CL, V1, Q, V2, beta, 0, 1]);
    const near = predict('2cmt', [oral(0, D)], times, [CL, V1, Q, V2, beta * (1 + 1e-9), 0, 1]);
    times.forEach((_, i) => {
      expect(Number.isFinite(at[i])).toBe(true);
      expect(relErr(near[i], at[i])).toBeLessThan(1e-8);
    });
  });
});

describe('model identities', () => {
  it('3cmt with equal peripheral rate constants equals the 2cmt with the peripherals lumped', () => {
    // Two peripheral compartments with Q2/V2 = Q3/V3 behave as one with Q = Q2 + Q3, V = V2 + V3 (exact lumping of linear compartments, common practice).
    const doses = [bolus(0, 500), inf(6, 600, 2), oral(12, 300)];
    const times = [0.5, 2, 6, 7, 8, 12, 13, 24, 72];
    const three = predict('3cmt', doses, times, [5, 10, 12, 24, 3, 6, 1.2, 0.3, 0.8]);
    const two = predict('2cmt', doses, times, [5, 10, 15, 30, 1.2, 0.3, 0.8]);
    times.forEach((_, i) => expect(relErr(three[i], two[i])).toBeLessThan(1e-9));
  });
  it('2cmt with a negligible peripheral compartment approaches the 1cmt', () => {
    const doses = [bolus(0, 500), oral(12, 300)];
    const times = [0.5, 2, 12, 13, 24];
    const two = predict('2cmt', doses, times, [4, 50, 1e-9, 1e-6, 1.2, 0.3, 0.8]);
    const one = predict('1cmt', doses, times, [4, 50, 1.2, 0.3, 0.8]);
    times.forEach((_, i) => expect(relErr(two[i], one[i])).toBeLessThan(1e-6));
  });
});

describe('timing conventions and edge cases', () => {
  const p1 = [4, 50, 1, 0, 1];
  it('a level at exactly a bolus time is the pre-dose level (TDM convention, common practice)', () => {
    const c = predict('1cmt', [bolus(0, 500), bolus(12, 500)], [12, 12 + 1e-9], p1);
    const pre = (500 / 50) * Math.exp(-0.08 * 12);
    expect(relErr(c[0], pre)).toBeLessThan(1e-13);
    expect(relErr(c[1], pre + 10)).toBeLessThan(1e-8);
  });
  it('a level at the first dose time and before it is 0', () => {
    const c = predict('2cmt', [bolus(5, 500), oral(5, 100)], [0, 3, 5], [3, 15, 6, 40, 1, 0, 1]);
    expect(Array.from(c)).toEqual([0, 0, 0]);
  });
  it('a level at a steady-state dose time is the steady-state trough, whatever came before', () => {
    const c = predict('1cmt', [bolus(0, 5000), bolus(24, 500, 12)], [24], p1);
    const k = 0.08;
    expect(relErr(c[0], ((500 / 50) * Math.exp(-k * 12)) / (1 - Math.exp(-k * 12)))).toBeLessThan(1e-13);
  });
  it('a steady-state dose cuts an infusion still running from before it (reset)', () => {
    const withRunning = predict('1cmt', [inf(0, 2400, 24), bolus(12, 500, 12)], [12, 15, 30], p1);
    const alone = predict('1cmt', [bolus(12, 500, 12)], [12, 15, 30], p1);
    Array.from(alone).forEach((v, i) => expect(relErr(withRunning[i], v)).toBeLessThan(1e-14));
  });
  it('two steady-state doses at one time superpose (linear models)', () => {
    // Superposition of linear systems (common practice): the two trains add.
    const times = [10, 10.5, 12, 15, 20, 30];
    const params = [3, 15, 6, 40, 0.9, 0.6, 0.75];
    const both = predict('2cmt', [oral(10, 300, 12), inf(10, 500, 1, 8)], times, params);
    const a = predict('2cmt', [oral(10, 300, 12)], times, params);
    const b = predict('2cmt', [inf(10, 500, 1, 8)], times, params);
    both.forEach((v, i) => expect(relErr(v, a[i] + b[i])).toBeLessThan(1e-13));
  });
  it('the Michaelis-Menten model refuses two steady-state doses at one time, saying why', () => {
    expect(() => getStructuralModel('1cmt-mm').prepare([oral(10, 300, 12), inf(10, 500, 1, 8)], [11])).toThrow(/two steady-state doses at 10 h/);
  });
  it('no doses: every level is 0; no output times: nothing to do', () => {
    expect(Array.from(predict('3cmt', [], [0, 1, 10], [5, 10, 12, 25, 1.5, 80, NaN, NaN, NaN]))).toEqual([0, 0, 0]);
    expect(predict('1cmt', [bolus(0, 100)], [], p1).length).toBe(0);
  });
  it('output times in any order and duplicated', () => {
    const sorted = predict('2cmt', [inf(0, 500, 2), oral(1, 200)], [0.5, 1, 1, 3, 6], [3, 15, 6, 40, 1, 0.3, 0.9]);
    const shuffled = predict('2cmt', [inf(0, 500, 2), oral(1, 200)], [6, 1, 0.5, 3, 1], [3, 15, 6, 40, 1, 0.3, 0.9]);
    expect(Array.from(shuffled)).toEqual([sorted[4], sorted[1], sorted[0], sorted[3], sorted[2]]);
  });
  it('overlapping infusions add their rates', () => {
    // Linear superposition (common practice): two overlapping infusions = sum of each alone.
    const both = predict('2cmt', [inf(0, 600, 6), inf(2, 300, 1)], [1, 2.5, 3, 5, 8], [3, 15, 6, 40, NaN, NaN, NaN]);
    const a = predict('2cmt', [inf(0, 600, 6)], [1, 2.5, 3, 5, 8], [3, 15, 6, 40, NaN, NaN, NaN]);
    const b = predict('2cmt', [inf(2, 300, 1)], [1, 2.5, 3, 5, 8], [3, 15, 6, 40, NaN, NaN, NaN]);
    both.forEach((v, i) => expect(relErr(v, a[i] + b[i])).toBeLessThan(1e-13));
  });
  it('invalid parameters return false and fill NaN', () => {
    const cases: [StructureId, number[]][] = [
      ['1cmt', [0, 50, 1, 0, 1]],
      ['1cmt', [4, -1, 1, 0, 1]],
      ['1cmt', [4, 50, NaN, 0, 1]],
      ['1cmt', [4, 50, 1, -0.1, 1]],
      ['1cmt', [4, 50, 1, 0, 0]],
      ['2cmt', [3, 15, NaN, 40, 1, 0, 1]],
      ['3cmt', [5, 10, 12, 25, 1.5, Infinity, 1, 0, 1]],
      ['1cmt-mm', [20, 0, 50, 1, 0, 1]],
    ];
    for (const [id, params] of cases) {
      const p = getStructuralModel(id).prepare([oral(0, 100)], [1, 2]);
      const out = new Float64Array(2);
      expect(p(Float64Array.from(params), out), `${id} ${params}`).toBe(false);
      expect(Number.isNaN(out[0]) && Number.isNaN(out[1])).toBe(true);
    }
  });
  it('ka, tlag and F are ignored (may be NaN) without oral doses', () => {
    const c = predict('1cmt', [bolus(0, 500)], [1], [4, 50, NaN, NaN, NaN]);
    expect(relErr(c[0], 10 * Math.exp(-0.08))).toBeLessThan(1e-14);
  });
  it('prepare rejects a bad history or output time, naming it', () => {
    const m = getStructuralModel('1cmt');
    expect(() => m.prepare([{ ...bolus(0, 100), sourceRow: 7 }, bolus(-1, 100)], [1])).toThrow(/dose 2: time/);
    expect(() => m.prepare([{ ...inf(0, 100, 0), sourceRow: 7 }], [1])).toThrow(/row 7.*duration/);
    expect(() => m.prepare([bolus(0, 100)], [1, NaN])).toThrow(/output time 2/);
  });
});

describe('Michaelis-Menten', () => {
  it('reduces to linear elimination with CL = Vmax / Km when C << Km (common practice)', () => {
    const Km = 1e10, CL = 4, V = 50;
    const doses = [bolus(0, 500), inf(6, 400, 2), oral(12, 300)];
    const times = [0.5, 3, 6, 7, 8, 12, 13, 24, 48];
    const mm = predict('1cmt-mm', doses, times, [CL * Km, Km, V, 1.2, 0.3, 0.8]);
    const lin = predict('1cmt', doses, times, [CL, V, 1.2, 0.3, 0.8]);
    times.forEach((_, i) => expect(relErr(mm[i], lin[i])).toBeLessThan(1e-6));
  });
  it('has no steady state when the input rate reaches Vmax', () => {
    const p = getStructuralModel('1cmt-mm').prepare([inf(0, 250, 1, 12)], [0, 1]);
    expect(p(Float64Array.from([20, 4, 50, NaN, NaN, NaN]), new Float64Array(2))).toBe(false);
  });
  it('returns false when the step budget runs out', () => {
    const p = getStructuralModel('1cmt-mm').prepare([bolus(0, 500)], [100], { maxSteps: 3 });
    expect(p(Float64Array.from([20, 4, 50, NaN, NaN, NaN]), new Float64Array(1))).toBe(false);
  });
  it('tighter tolerances converge (self-consistency of the error control)', () => {
    const doses = [oral(0, 300), inf(10, 300, 3)];
    const times = [1, 5, 11, 14, 30];
    const params = Float64Array.from([20, 4, 50, 1.2, 0.5, 0.9]);
    const run = (relTol: number) => {
      const out = new Float64Array(times.length);
      getStructuralModel('1cmt-mm').prepare(doses, times, { relTol, absTol: relTol * 1e-2 })(params, out);
      return out;
    };
    const loose = run(1e-5), tight = run(1e-11);
    tight.forEach((v, i) => expect(relErr(loose[i], v)).toBeLessThan(1e-4));
  });
});
