/**
 * The specialised walks of the linear models (one oral dose; bolus and infusion histories with
 * one or two modes) against the general event-to-event walk, bit for bit. Not an outside
 * reference: the general walk is checked against scipy, mpmath and textbook closed forms by the
 * other tests in this folder; this test makes sure the fast paths compute the very same numbers
 * (same operations in the same order), on generated histories and parameters that include the
 * edge cases (tlag exactly at a level time, tlag 0, ka equal or next to the elimination rate,
 * levels before the dose, duplicate and unsorted level times, invalid parameters).
 */
import { describe, expect, it } from 'vitest';
import type { Dose } from '../../../engine/data/types.js';
import { getStructuralModel } from '../../../engine/models/catalogue.js';
import { makeThreeCompartmentModes, oneCompartmentModes, prepareLinearGeneral, twoCompartmentModes, type ModeFunction } from '../../../engine/models/linear.js';
import type { StructureId } from '../../../engine/models/types.js';

/** Small deterministic generator for the test data (Park-Miller minimal standard). */
function lcg(seed: number): () => number {
  let x = seed;
  return () => {
    x = (x * 48271) % 2147483647;
    return x / 2147483647;
  };
}

const MODES: Record<'1cmt' | '2cmt' | '3cmt', { n: number; nd: number; modes: () => ModeFunction }> = {
  '1cmt': { n: 1, nd: 2, modes: () => oneCompartmentModes },
  '2cmt': { n: 2, nd: 4, modes: () => twoCompartmentModes },
  '3cmt': { n: 3, nd: 6, modes: makeThreeCompartmentModes },
};

type Design = 'oral-one' | 'bolus-one' | 'infusion-one' | 'static' | 'oral-many';

function history(r: () => number, design: Design): Dose[] {
  const pick = <T>(a: readonly T[]): T => a[Math.floor(r() * a.length)];
  const single = design.endsWith('-one');
  const n = single ? 1 : 1 + Math.floor(r() * 10);
  return Array.from({ length: n }, () => {
    const route: Dose['route'] = design.startsWith('oral') ? 'oral' : design === 'bolus-one' ? 'bolus' : design === 'infusion-one' ? 'infusion' : pick(['bolus', 'infusion'] as const);
    return {
      timeH: single ? pick([0, 0, 1.5, 3]) : Math.round(r() * 96) / 2,
      amountMg: 100 + Math.floor(r() * 900),
      route,
      durationH: route === 'infusion' ? pick([0.25, 0.5, 1, 2]) : 0,
    };
  });
}

/** Same bits, NaN included (Object.is tells +0 from -0 too). */
function sameBits(a: Float64Array, b: Float64Array): boolean {
  for (let i = 0; i < a.length; i++) if (!Object.is(a[i], b[i])) return false;
  return true;
}

describe('specialised walks give the general walk\'s numbers to the last bit', () => {
  for (const id of ['1cmt', '2cmt', '3cmt'] as const) {
    for (const design of ['oral-one', 'bolus-one', 'infusion-one', 'static', 'oral-many'] as const) {
      it(`${id}, ${design}`, () => {
        const r = lcg(id.length * 7919 + design.length * 104729 + 1);
        const model = getStructuralModel(id as StructureId);
        const { n, nd, modes } = MODES[id];
        let compared = 0;
        for (let h = 0; h < 60; h++) {
          const doses = history(r, design);
          const nt = 1 + Math.floor(r() * 12);
          const times = Array.from({ length: nt }, () => (r() < 0.5 ? Math.round(r() * 100) / 2 : r() * 60));
          if (r() < 0.3) times.sort((a, b) => a - b);
          if (r() < 0.2) times.push(times[0]);
          const fast = model.prepare(doses, times);
          const general = prepareLinearGeneral(n, nd, modes(), doses, times);
          const a = new Float64Array(times.length);
          const b = new Float64Array(times.length);
          for (let j = 0; j < 8; j++) {
            const p = new Float64Array(model.parameterOrder.length);
            model.parameters.forEach((info, i) => (p[i] = info.defaultInitial * Math.exp((r() - 0.5) * 3)));
            if (j === 1) p[nd] = p[0] / p[1]; // ka equal to CL/V (the ka = k limit for one compartment)
            if (j === 2) p[nd + 1] = times[Math.floor(r() * times.length)] - doses[0].timeH; // entry exactly at a level
            if (j === 3) p[nd + 1] = 0;
            if (j === 4) p[nd] = (p[0] / p[1]) * (1 + 1e-9);
            if (j === 5) p[Math.floor(r() * p.length)] = [NaN, -1, 0, Infinity][Math.floor(r() * 4)];
            if (j === 6) p[1] = 1e-300; // huge 1/V and rates
            const okA = fast(p, a);
            const okB = general(p, b);
            expect(okA).toBe(okB);
            if (!sameBits(a, b)) expect(Array.from(a)).toEqual(Array.from(b));
            expect(sameBits(a, b)).toBe(true);
            compared++;
          }
        }
        expect(compared).toBe(480);
      });
    }
  }

  it('a bolus history too long for the shared factor table (every interval length distinct) takes the table of its own', () => {
    const r = lcg(99);
    const doses: Dose[] = Array.from({ length: 17_000 }, (_, i) => ({ timeH: i + r() * 0.9, amountMg: 100, route: 'bolus' as const, durationH: 0 }));
    const times = [5, 16_999.95, 17_000.5];
    for (const id of ['1cmt', '2cmt'] as const) {
      const { n, nd, modes } = MODES[id];
      const model = getStructuralModel(id);
      const p = Float64Array.from(model.parameters.map((info) => info.defaultInitial));
      const a = new Float64Array(times.length);
      const b = new Float64Array(times.length);
      expect(model.prepare(doses, times)(p, a)).toBe(true);
      expect(prepareLinearGeneral(n, nd, modes(), doses, times)(p, b)).toBe(true);
      expect(sameBits(a, b)).toBe(true);
      expect(a[2]).toBeGreaterThan(0);
    }
  });

  it('one oral dose with more distinct level spacings than the shared table holds takes tables of its own', () => {
    const times = Array.from({ length: 4200 }, (_, i) => 0.5 + i * 0.01 + (i * i) * 1e-7);
    const doses: Dose[] = [{ timeH: 0, amountMg: 500, route: 'oral', durationH: 0 }];
    const { n, nd, modes } = MODES['1cmt'];
    const model = getStructuralModel('1cmt');
    const p = Float64Array.from([4, 50, 1.2, 0.3, 0.8]);
    const a = new Float64Array(times.length);
    const b = new Float64Array(times.length);
    expect(model.prepare(doses, times)(p, a)).toBe(true);
    expect(prepareLinearGeneral(n, nd, modes(), doses, times)(p, b)).toBe(true);
    expect(sameBits(a, b)).toBe(true);
    expect(a[100]).toBeGreaterThan(0);
  });

  it('an infusion history with more distinct rates than the step program can name takes the array-loop walk', () => {
    const doses: Dose[] = Array.from({ length: 2_200 }, (_, i) => ({ timeH: 4 * i, amountMg: 100 + i, route: 'infusion' as const, durationH: 1 }));
    const times = [3, 4_401.5, 8_799.5];
    for (const id of ['1cmt', '2cmt'] as const) {
      const { n, nd, modes } = MODES[id];
      const model = getStructuralModel(id);
      const p = Float64Array.from(model.parameters.map((info) => info.defaultInitial));
      const a = new Float64Array(times.length);
      const b = new Float64Array(times.length);
      expect(model.prepare(doses, times)(p, a)).toBe(true);
      expect(prepareLinearGeneral(n, nd, modes(), doses, times)(p, b)).toBe(true);
      expect(sameBits(a, b)).toBe(true);
      expect(a[2]).toBeGreaterThan(0);
    }
  });
});
