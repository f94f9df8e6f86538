/**
 * The seeds of a fit in job threads of this process (main/services/seedThreads.ts, how `plateau
 * fit` runs them) on R's Theoph (datasets::Theoph, resources/validation/reference/theoph): the
 * record equals the in-process path for the same seeds number for number (only the timing fields
 * differ; the kept seed's diagnostics added by a later job), a thread whose seed is done runs the
 * next one, and a cancel ends every seed's thread.
 */
import { beforeAll, describe, expect, it } from 'vitest';
import { comparableRecord as comparable, theophSeedsDataset as dataset, theophSeedsSpec as spec, theophSeedsSpecJson as specJson } from '../../helpers/theophSeeds.js';
import { CoreSlots } from '../../../main/services/coreSlots.js';
import { fitSeeds } from '../../../main/services/fitSeeds.js';
import { addDiagnosticsInThreads, runSeedInThreads } from '../../../main/services/seedThreads.js';
import { JobThreads } from '../../../main/worker/jobThreads.js';
import { ensureBuilt } from '../services/build.js';

beforeAll(() => ensureBuilt(), 300_000);

const limits = { heapMb: 1024, timeLimitMs: 600_000 };

describe('seeds in job threads', () => {
  it('give the same record as the in-process path; with one core one thread runs the three seeds in turn, then the kept seed\'s diagnostics', async () => {
    const jobs = new JobThreads(limits);
    try {
      const phases = new Set<string>();
      const o = { specJson, jobs };
      const inThreads = await fitSeeds(dataset, spec, { runOne: runSeedInThreads(dataset, o), addDiagnostics: addDiagnosticsInThreads(dataset, o), slots: new CoreSlots(1), onProgress: (_s, p) => void phases.add(p.phase) });
      // seedsAtOnce(3, 1) = 1 at once: each seed reuses the thread of the one before.
      expect(jobs.started).toBe(1);
      expect(jobs.busy).toBe(0);
      expect(phases.has('search') && phases.has('post-fit')).toBe(true);
      expect(inThreads.seeds.runs.map((r) => r.seed)).toEqual([3, 4, 5]);
      expect(inThreads.diagnostics?.vpc.bins.length).toBeGreaterThan(0);
      // The in-process path with all three seeds at once computes every seed's diagnostics in one go.
      expect(comparable(inThreads)).toEqual(comparable(await fitSeeds(dataset, spec, { concurrency: 3 })));
    } finally {
      jobs.close();
    }
  }, 180_000);

  it('a cancel stops every seed at once and rejects as cancelled', async () => {
    const jobs = new JobThreads(limits);
    try {
      const ctl = new AbortController();
      const long = runSeedInThreads(dataset, { specJson, settings: { searchMinIterations: 5000, searchMaxIterations: 5000, autoEndSearch: false }, jobs });
      const run = fitSeeds(dataset, spec, { runOne: long, slots: new CoreSlots(2), signal: ctl.signal, onProgress: () => ctl.abort() });
      const t0 = Date.now();
      await expect(run).rejects.toMatchObject({ name: 'AbortError' });
      expect(Date.now() - t0).toBeLessThan(10_000);
      expect(jobs.busy).toBe(0);
    } finally {
      jobs.close();
    }
  }, 60_000);
});
