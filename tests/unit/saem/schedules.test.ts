import { describe, expect, it } from 'vitest';
import { annealingSchedule, stepSizeSchedule } from '../../../engine/saem/schedules.js';
import { parseSaemSettings } from '../../../engine/saem/settings.js';

describe('step-size schedule record', () => {
  it('is 1 in the search phase, then 1/(k - K1 + W)^alpha after the phase switch', () => {
    // Step sizes with sum gamma = infinity and sum gamma^2 < infinity (alpha in (1/2, 1]) are the
    // stochastic-approximation conditions of SAEM's convergence: Delyon, Lavielle & Moulines,
    // Ann. Statist. 27 (1999) 94-128 (from memory).
    const settings = parseSaemSettings({ stepExponent: 0.7 });
    const schedule = stepSizeSchedule.init(settings);
    for (const k of [1, 5, 40]) expect(stepSizeSchedule.update(schedule, k)).toBe(1);
    expect(schedule.searchEnd).toBeNull();
    stepSizeSchedule.final(schedule, 40, 10);
    expect(schedule.searchEnd).toBe(40);
    // First averaging iteration k = 41: the W = 10 window iterations plus this one.
    expect(stepSizeSchedule.update(schedule, 41)).toBeCloseTo(Math.pow(11, -0.7), 15);
    expect(stepSizeSchedule.update(schedule, 140)).toBeCloseTo(Math.pow(110, -0.7), 15);
  });
});

describe('annealing schedule record', () => {
  it('anneals only the first annealingIterations search iterations', () => {
    const schedule = annealingSchedule.init(parseSaemSettings({ annealingIterations: 3, annealingTau: 0.9 }));
    expect([1, 2, 3, 4].map((k) => annealingSchedule.update(schedule, k, true))).toEqual([true, true, true, false]);
    expect(annealingSchedule.update(schedule, 2, false)).toBe(false); // never in the averaging phase
    annealingSchedule.update(schedule, 1, true);
    annealingSchedule.final(schedule);
    expect(schedule.active).toBe(false);
  });
  it('defaults to the first half of the minimum search when annealingIterations is null', () => {
    const schedule = annealingSchedule.init(parseSaemSettings({ annealingIterations: null, searchMinIterations: 61 }));
    expect(schedule.iterations).toBe(30);
  });
  it('lets a variance fall by at most (1 - tau) per iteration (common practice)', () => {
    const schedule = annealingSchedule.init(parseSaemSettings({ annealingTau: 0.9 }));
    expect(annealingSchedule.varianceFloor(schedule, 0.25)).toBeCloseTo(0.225, 15);
    expect(annealingSchedule.sdVarianceFloor(schedule, 0.5)).toBeCloseTo(0.225, 15);
    // Combined error after the numerical step: a and b fall by at most sqrt(tau), i.e. a^2, b^2 by tau.
    const theta = { mu: new Float64Array(0), beta: new Float64Array(0), omega: new Float64Array(0), a: 0.1, b: 0.01 };
    annealingSchedule.update(schedule, 1, true);
    annealingSchedule.holdCombinedError(schedule, theta, 1, 0.005);
    expect(theta.a * theta.a).toBeCloseTo(0.9, 12);
    expect(theta.b).toBe(0.01); // a rise is never floored
    annealingSchedule.final(schedule);
    const later = { ...theta, a: 0.1 };
    annealingSchedule.holdCombinedError(schedule, later, 1, 1);
    expect(later.a).toBe(0.1); // no floor once annealing ends
  });
});
