/**
 * The seeds' verdict (engine/posthoc/seedAgreement.ts): the rule is ours (range across seeds
 * against the SE; -2LL range against max(1, 3 x Monte Carlo error)), so these checks are of the
 * rule as documented, on given numbers.
 */
import { describe, expect, it } from 'vitest';
import { keptIndex, seedAgreement, type SeedFitSummary } from '../../../engine/posthoc/seedAgreement.js';

const run = (seed: number, estimates: number[], minus2LL: number | null, usableAsPrior = true): SeedFitSummary => ({ seed, estimates, minus2LL, mcError: 0.1, usableAsPrior });

describe('seedAgreement', () => {
  it('agreeing seeds: verdict agree, the lowest -2LL kept', () => {
    const a = seedAgreement(['CL', 'BSV CL'], [run(1, [4.0, 0.30], 100.4), run(2, [4.05, 0.31], 100.1), run(3, [3.98, 0.29], 100.6)], [0.1, 0.05]);
    expect(a.agree).toBe(true);
    expect(a.keptSeed).toBe(2);
    expect(a.keptReason).toMatch(/lowest importance-sampling -2LL \(100\.10\) of 3 seeds/);
    expect(a.estimates[1].rangeInSe).toBeCloseTo(0.4, 10);
    expect(a.verdict).toBe('the 3 seeds agree');
  });
  it('a BSV that differs by more than its SE, and a -2LL spread, are named', () => {
    const a = seedAgreement(['CL', 'BSV V1'], [run(1, [4.0, 0.25], 1635.3), run(2, [4.0, 0.036], 1648.8), run(3, [4.0, 0.24], 1635.4)], [0.1, 0.049]);
    expect(a.agree).toBe(false);
    expect(a.disagreeing).toEqual(['BSV V1', '-2LL']);
    expect(a.keptSeed).toBe(1);
    expect(a.verdict).toMatch(/DISAGREE on BSV V1, -2LL/);
  });
  it('a degenerate fit is not kept while a usable one exists; a single seed is not judged', () => {
    expect(keptIndex([run(1, [1], 90, false), run(2, [1], 95)])).toBe(1);
    const one = seedAgreement(['CL'], [run(7, [4], 10)], [0.1]);
    expect(one.agree).toBe(true);
    expect(one.verdict).toMatch(/one seed only/);
  });
  it('a non-finite estimate in any seed is a disagreement', () => {
    const a = seedAgreement(['CL'], [run(1, [4], 10), run(2, [NaN], 10.2)], [0.1]);
    expect(a.disagreeing).toEqual(['CL']);
  });
});
