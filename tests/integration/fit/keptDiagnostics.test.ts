/**
 * Diagnostics for the kept seed only (main/services/fitSeeds.ts, fitPosthoc.ts
 * addDeferredDiagnostics) on R's Theoph (datasets::Theoph, resources/validation/reference/theoph):
 * a record whose diagnostics were left for later and then added is the record computed in one
 * go, field for field and in the same key order (only timing fields differ), warnings included;
 * fitSeeds computes the diagnostics of the kept seed alone when the seeds outnumber their cores,
 * and of none of them deferred when each seed has a core. These are checks of our own
 * orchestration against our own one-go path, not against an outside reference.
 */
import { readFileSync } from 'node:fs';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import { parseCanonicalCsv } from '../../../engine/data/canonicalCsv.js';
import { parseModelSpec } from '../../../engine/spec/modelSpec.js';
import { CoreSlots } from '../../../main/services/coreSlots.js';
import { addDeferredDiagnostics, addPosthoc, type PosthocFitRecord } from '../../../main/services/fitPosthoc.js';
import { fitDataset } from '../../../main/services/fitService.js';
import { addDiagnosticsInProcess, fitSeeds, runSeedInProcess, type AddSeedDiagnostics, type RunOneSeed } from '../../../main/services/fitSeeds.js';

const theophCsv = readFileSync(path.resolve(__dirname, '../../../resources/validation/reference/theoph/theoph.csv'), 'utf8');
const dataset = parseCanonicalCsv(theophCsv);
const short = { searchMinIterations: 40, searchMaxIterations: 60, averagingIterations: 30, chains: 2 };
const spec = parseModelSpec({
  structure: '1cmt',
  parameters: { CL: { typical: 0.05, bsv: 0.3 }, V: { typical: 0.5, bsv: 0.3 }, ka: { typical: 1.5, bsv: 0.3 } },
  residual: { model: 'additive', a: 1 },
  estimation: { seed: 10, ...short },
});

/** The record as JSON text without its wall/CPU times: same fields, same order, same numbers. */
const comparable = (record: unknown): string => JSON.stringify(record, (k, v) => (k === 'timing' || k === 'timingMs' ? undefined : v));

describe('diagnostics of the kept seed only', () => {
  it('deferred then added = computed in one go, with diagnostics warnings placed before the degeneracy warning', async () => {
    // Proportional error predicts 0 at Theoph's time-0 levels (set to 0 here: a derived dataset),
    // so their simulated levels have no spread (an NPDE warning from the diagnostics), and this
    // short fit degenerates (collapsed BSVs: a degeneracy warning after the post-fit ones).
    const zeroAtDose = parseCanonicalCsv(theophCsv.replace(/^(\d+),0,level,,,[0-9.]+,/gm, '$1,0,level,,,0,'));
    const prop = parseModelSpec({ ...spec, residual: { model: 'proportional', b: 0.2 } });
    const outcome = await fitDataset(zeroAtDose, prop, { seed: 4 });
    const oneGo = await addPosthoc(outcome);
    const deferred = await addPosthoc(outcome, { deferDiagnostics: true });
    expect(deferred.diagnostics).toBeNull();
    expect(deferred.posthoc.diagnosticsDeferred).toBe(true);
    const added = await addDeferredDiagnostics({ record: JSON.parse(JSON.stringify(deferred)) as PosthocFitRecord, model: outcome.model });
    expect(oneGo.degeneracy?.usableAsPrior).toBe(false);
    expect(oneGo.diagnostics?.warnings.length).toBeGreaterThan(0);
    expect(oneGo.warnings.at(-1)).toMatch(/^degenerate fit/);
    expect(comparable(added)).toBe(comparable(JSON.parse(JSON.stringify(oneGo))));
    // A record with its diagnostics is returned as it is.
    expect(await addDeferredDiagnostics({ record: oneGo, model: outcome.model })).toBe(oneGo);
  }, 120_000);

  it('fitSeeds: seeds outnumbering their cores get no diagnostics, the kept one gets them once; the record equals the one-go fit', async () => {
    const inner = runSeedInProcess(dataset, spec);
    const deferredSeeds: number[] = [];
    const runOne: RunOneSeed = async (seed, signal, onProgress, threads, defer) => {
      const r = await inner(seed, signal, onProgress, threads, defer);
      if (r.posthoc.diagnosticsDeferred) deferredSeeds.push(seed);
      return r;
    };
    const addedFor: number[] = [];
    const innerAdd = addDiagnosticsInProcess(dataset, spec);
    const addDiagnostics: AddSeedDiagnostics = async (record, signal, onProgress) => (addedFor.push(record.seed), innerAdd(record, signal, onProgress));
    const slots = new CoreSlots(2);
    const kept = await fitSeeds(dataset, spec, { runOne, addDiagnostics, slots });
    expect(deferredSeeds.sort()).toEqual([10, 11, 12]);
    expect(addedFor).toEqual([kept.seeds.keptSeed]);
    expect(slots.inUse).toBe(0);
    expect(kept.diagnostics?.npde.replicates).toBeGreaterThan(0);
    expect(kept.posthoc.diagnosticsDeferred).toBeUndefined();
    // Each seed on its own core: nothing deferred, every seed with its diagnostics, the same record.
    const deferredBefore = deferredSeeds.length;
    const oneGo = await fitSeeds(dataset, spec, { runOne, addDiagnostics, slots: new CoreSlots(3) });
    expect(deferredSeeds.length).toBe(deferredBefore);
    expect(addedFor).toHaveLength(1);
    expect(comparable(kept)).toBe(comparable(oneGo));
    // The default in-process path (one seed at a time) defers too, with the same record.
    expect(comparable(await fitSeeds(dataset, spec))).toBe(comparable(oneGo));
  }, 240_000);

  it('a cancel during the kept seed\'s diagnostics rejects as cancelled and gives the core back', async () => {
    const ctl = new AbortController();
    const slots = new CoreSlots(1);
    const addDiagnostics: AddSeedDiagnostics = async (_record, signal) => {
      ctl.abort();
      await new Promise((r) => setTimeout(r, 20));
      if (signal.aborted) throw Object.assign(new Error('cancelled'), { name: 'AbortError' });
      throw new Error('the signal should have aborted');
    };
    await expect(fitSeeds(dataset, spec, { runOne: runSeedInProcess(dataset, spec, { posthoc: { linearisedSe: false } }), addDiagnostics, slots, signal: ctl.signal })).rejects.toMatchObject({ name: 'AbortError' });
    expect(slots.inUse).toBe(0);
  }, 120_000);
});
