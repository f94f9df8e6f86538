/**
 * The seeds of a fit in engine worker processes (main/services/fitRunner.ts runSeedInWorker) on
 * R's Theoph (datasets::Theoph, resources/validation/reference/theoph): the record equals the in-process path
 * for the same seeds, number for number (the worker runs the same engine code; only the
 * timing fields differ; the kept seed's diagnostics from a later job), and the shared core slots
 * bound how many seeds compute at once.
 */
import { beforeAll, describe, expect, it } from 'vitest';
import { comparableRecord as comparable, theophSeedsDataset as dataset, theophSeedsSpec as spec, theophSeedsSpecJson as specJson } from '../../helpers/theophSeeds.js';
import { CoreSlots } from '../../../main/services/coreSlots.js';
import { EngineWorker } from '../../../main/services/engineClient.js';
import { addDiagnosticsInWorker, runSeedInWorker } from '../../../main/services/fitRunner.js';
import { fitSeeds, runSeedInProcess, type RunOneSeed } from '../../../main/services/fitSeeds.js';
import { engineWorkerPath, ensureBuilt } from '../services/build.js';

beforeAll(() => ensureBuilt(), 300_000);

describe('seeds in worker processes', () => {
  it('give the same record as the in-process path for the same seeds, with at most `slots` at once', async () => {
    const slots = new CoreSlots(2);
    let maxInUse = 0;
    const inner = runSeedInWorker(dataset, { specJson, worker: { modulePath: engineWorkerPath } });
    const runOne: RunOneSeed = async (...args) => {
      maxInUse = Math.max(maxInUse, slots.inUse);
      return inner(...args);
    };
    const phases = new Set<string>();
    // 3 seeds on 2 cores: the kept seed's diagnostics come from a later job in a worker.
    const addDiagnostics = addDiagnosticsInWorker(dataset, { specJson, worker: { modulePath: engineWorkerPath } });
    const inWorkers = await fitSeeds(dataset, spec, { runOne, addDiagnostics, slots, onProgress: (_s, p) => void phases.add(p.phase) });
    // In process with the three seeds at once: every seed's diagnostics in one go.
    const inProcess = await fitSeeds(dataset, spec, { concurrency: 3 });
    expect(inWorkers.diagnostics?.npde.replicates).toBeGreaterThan(0);
    expect(inWorkers.seeds.runs.map((r) => r.seed)).toEqual([3, 4, 5]);
    expect(maxInUse).toBeLessThanOrEqual(2);
    expect(slots.inUse).toBe(0);
    expect(phases.has('search')).toBe(true);
    expect(comparable(inWorkers)).toEqual(comparable(inProcess));
  }, 180_000);

  it('one reused worker running the seeds one after another gives the same record (the queue keeps idle workers)', async () => {
    const idle: EngineWorker[] = [];
    const made: EngineWorker[] = [];
    try {
      const runOne = runSeedInWorker(dataset, {
        specJson,
        worker: { modulePath: engineWorkerPath },
        takeWorker: () => idle.pop() ?? (made.push(EngineWorker.spawn({ modulePath: engineWorkerPath })), made[made.length - 1]),
        giveBack: (w) => void idle.push(w),
      });
      const reused = await fitSeeds(dataset, spec, { runOne, concurrency: 1 });
      expect(made).toHaveLength(1);
      expect(comparable(reused)).toEqual(comparable(await fitSeeds(dataset, spec)));
    } finally {
      for (const w of made) w.kill();
    }
  }, 180_000);

  it('a cancel stops every seed and rejects as cancelled', async () => {
    const ctl = new AbortController();
    const long = runSeedInWorker(dataset, { specJson, settings: { searchMinIterations: 5000, searchMaxIterations: 5000, autoEndSearch: false }, worker: { modulePath: engineWorkerPath } });
    const started = Date.now();
    const run = fitSeeds(dataset, spec, {
      runOne: long,
      slots: new CoreSlots(2),
      signal: ctl.signal,
      onProgress: () => ctl.abort(),
    });
    await expect(run).rejects.toMatchObject({ name: 'AbortError' });
    expect(Date.now() - started).toBeLessThan(20_000);
  }, 60_000);
});
