/**
 * fitSeeds (main/services/fitSeeds.ts) on R's Theoph (datasets::Theoph, resources/validation/reference/theoph):
 * the injected runOne is the seam for worker processes; here it wraps the real in-process runner,
 * so these checks are of the orchestration (seeds run, concurrency bound, the kept fit, the
 * verdict in the record, cancellation), not of the estimates.
 */
import { readFileSync } from 'node:fs';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import { parseCanonicalCsv } from '../../../engine/data/canonicalCsv.js';
import { parseModelSpec } from '../../../engine/spec/modelSpec.js';
import { CoreSlots } from '../../../main/services/coreSlots.js';
import { fitSeeds, runSeedInProcess, seedList, seedsAtOnce, type RunOneSeed } from '../../../main/services/fitSeeds.js';

const dataset = parseCanonicalCsv(readFileSync(path.resolve(__dirname, '../../../resources/validation/reference/theoph/theoph.csv'), 'utf8'));
const spec = parseModelSpec({
  structure: '1cmt',
  parameters: { CL: { typical: 0.05, bsv: 0.3 }, V: { typical: 0.5, bsv: 0.3 }, ka: { typical: 1.5, bsv: 0.3 } },
  residual: { model: 'additive', a: 1 },
  estimation: { seed: 10, searchMinIterations: 40, searchMaxIterations: 60, averagingIterations: 30, chains: 2 },
});

describe('fitSeeds', () => {
  it('runs the default 3 seeds from the spec seed through runOne, at most `concurrency` at once, and keeps the lowest -2LL', async () => {
    const inner = runSeedInProcess(dataset, spec, { posthoc: { diagnostics: false, linearisedSe: false } });
    const started: number[] = [];
    let inFlight = 0;
    let maxInFlight = 0;
    const runOne: RunOneSeed = async (seed, signal, onProgress) => {
      started.push(seed);
      inFlight++;
      maxInFlight = Math.max(maxInFlight, inFlight);
      try {
        await new Promise((r) => setTimeout(r, 5));
        return await inner(seed, signal, onProgress);
      } finally {
        inFlight--;
      }
    };
    const record = await fitSeeds(dataset, spec, { runOne, concurrency: 2 });
    expect(started.sort()).toEqual([10, 11, 12]);
    expect(maxInFlight).toBeLessThanOrEqual(2);
    const m2 = record.seeds.runs.map((r) => r.minus2LL!);
    expect(record.seeds.keptSeed).toBe(record.seeds.runs[m2.indexOf(Math.min(...m2))].seed);
    expect(record.seed).toBe(record.seeds.keptSeed);
    expect(record.likelihood.minus2LL).toBe(Math.min(...m2));
    expect(record.seeds.estimates.map((e) => e.label)).toEqual(['CL', 'V', 'ka', 'BSV CL', 'BSV V', 'BSV ka', 'residual a']);
    expect(JSON.parse(JSON.stringify(record)).seeds.verdict).toBe(record.seeds.verdict);
  }, 120_000);
  it('seeds: 1 runs one seed; the count is bounded 1..16; an aborted signal cancels', async () => {
    const one = await fitSeeds(dataset, spec, { settings: { seeds: 1 }, posthoc: { diagnostics: false, linearisedSe: false } });
    expect(one.seeds.runs).toHaveLength(1);
    expect(one.seeds.verdict).toMatch(/one seed only/);
    expect(() => seedList(1, 17)).toThrow(/\[1, 16\]/);
    await expect(fitSeeds(dataset, spec, { signal: { aborted: true } })).rejects.toThrow(/cancelled/);
  }, 120_000);
  it('with the scheduler, a fit takes the free cores: threads when cores outnumber seeds, all seeds at once when seeds outnumber cores', async () => {
    const inner = runSeedInProcess(dataset, spec, { posthoc: { diagnostics: false, linearisedSe: false } });
    const threadsOf = new Map<number, number>();
    let inFlight = 0;
    let maxInFlight = 0;
    let slotsInUse = 0;
    let slots = new CoreSlots(3);
    const runOne: RunOneSeed = async (seed, signal, onProgress, threads) => {
      threadsOf.set(seed, threads ?? 1);
      slotsInUse = Math.max(slotsInUse, slots.inUse);
      inFlight++;
      maxInFlight = Math.max(maxInFlight, inFlight);
      try {
        await new Promise((r) => setTimeout(r, 5));
        return await inner(seed, signal, onProgress, threads);
      } finally {
        inFlight--;
      }
    };
    // One seed of a fit large enough for threads (132 levels x 10 chains) on 3 free slots: 3 threads.
    await fitSeeds(dataset, spec, { runOne, settings: { seeds: 1, chains: 10 }, slots });
    expect(threadsOf.get(10)).toBe(3);
    expect(slots.inUse).toBe(0);
    // The same fit with 2 chains is too small for threads: one slot, one thread.
    threadsOf.clear();
    slotsInUse = 0;
    await fitSeeds(dataset, spec, { runOne, settings: { seeds: 1 }, slots });
    expect(threadsOf.get(10)).toBe(1);
    expect(slotsInUse).toBe(1);
    // Three seeds on 2 slots: one thread each, all three at once (two per core at most).
    threadsOf.clear();
    maxInFlight = 0;
    slots = new CoreSlots(2);
    await fitSeeds(dataset, spec, { runOne, slots });
    expect([...threadsOf.values()]).toEqual([1, 1, 1]);
    expect(maxInFlight).toBe(3);
    expect(slots.inUse).toBe(0);
  }, 120_000);
  it('seeds at once: all when the cores suffice; all (at most two per core) when the seeds do not fill the cores evenly; else a core\'s worth', () => {
    expect(seedsAtOnce(3, 4)).toBe(3);
    expect(seedsAtOnce(3, 2)).toBe(3);
    expect(seedsAtOnce(4, 2)).toBe(2);
    expect(seedsAtOnce(3, 1)).toBe(1);
    expect(seedsAtOnce(16, 3)).toBe(6);
  });
});
