/**
 * Job threads of this process (main/worker/jobThreads.ts), as `plateau fit` runs its seeds and
 * the engine worker process its jobs: a synchronous step is cancelled at once, the time and
 * memory limits stop the job and not the process, a thread that exits ends only its own job, a
 * thread whose job ended cleanly runs the next one, and closing ends every thread.
 */
import { beforeAll, describe, expect, it } from 'vitest';
import { JobThreads } from '../../../main/worker/jobThreads.js';
import { ensureBuilt } from '../services/build.js';

beforeAll(() => ensureBuilt(), 300_000);

const limits = { heapMb: 512, timeLimitMs: 60_000 };

describe('job threads', () => {
  it('run a job, keep the thread for the next one, and cancel a synchronous step within 1 s', async () => {
    const jobs = new JobThreads(limits);
    try {
      expect(await jobs.run({ kind: 'probe', mode: 'echo', value: 'one' })).toBe('one');
      expect(await jobs.run({ kind: 'probe', mode: 'echo', value: 'two' })).toBe('two');
      expect(jobs.started).toBe(1);
      const ac = new AbortController();
      const p = jobs.run({ kind: 'probe', mode: 'spin', ms: 30_000 }, { signal: ac.signal });
      await new Promise((r) => setTimeout(r, 300));
      const t0 = performance.now();
      ac.abort();
      await expect(p).rejects.toMatchObject({ kind: 'cancelled' });
      expect(performance.now() - t0).toBeLessThan(1000);
      expect(jobs.busy).toBe(0);
      // The cancelled job's thread was ended; the next job gets a new one.
      expect(await jobs.run({ kind: 'probe', mode: 'echo', value: 3 })).toBe(3);
      expect(jobs.started).toBe(2);
    } finally {
      jobs.close();
    }
  }, 60_000);

  it('enforce the time and memory limits and survive a thread that exits', async () => {
    const timed = new JobThreads({ ...limits, timeLimitMs: 500 });
    try {
      await expect(timed.run({ kind: 'probe', mode: 'spin', ms: 30_000 })).rejects.toMatchObject({ kind: 'worker', message: expect.stringMatching(/time limit/) });
    } finally {
      timed.close();
    }
    const small = new JobThreads({ ...limits, heapMb: 64 });
    try {
      await expect(small.run({ kind: 'probe', mode: 'alloc' })).rejects.toMatchObject({ kind: 'worker', message: expect.stringMatching(/more than 64 MB/) });
      // process.exit in a job thread ends that thread only.
      await expect(small.run({ kind: 'probe', mode: 'crash' })).rejects.toMatchObject({ kind: 'worker', message: expect.stringMatching(/ended without an answer \(exit code 3\)/) });
      expect(await small.run({ kind: 'probe', mode: 'echo', value: 'still here' })).toBe('still here');
    } finally {
      small.close();
    }
  }, 60_000);

  it('close fails running jobs as cancelled and refuses new ones', async () => {
    const jobs = new JobThreads(limits);
    const p = jobs.run({ kind: 'probe', mode: 'spin', ms: 30_000 });
    await new Promise((r) => setTimeout(r, 200));
    jobs.close();
    await expect(p).rejects.toMatchObject({ kind: 'cancelled' });
    await expect(jobs.run({ kind: 'probe', mode: 'echo', value: 1 })).rejects.toMatchObject({ kind: 'cancelled' });
    expect(jobs.busy).toBe(0);
  }, 30_000);
});
