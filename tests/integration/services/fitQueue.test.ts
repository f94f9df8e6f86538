/**
 * The fit queue with real engine worker processes (no fakes): results equal direct engine calls,
 * a killed or silent worker fails only its job with the reason, a restart restores the queue,
 * and cancel lands within 1 s mid-fit and mid-post-fit.
 */
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';
import { afterEach, beforeAll, describe, expect, it } from 'vitest';
import { parseModelSpec } from '../../../engine/spec/modelSpec.js';
import type { QueueSnapshot } from '../../../main/protocol/bridge.js';
import { FitQueue } from '../../../main/services/fitQueue.js';
import { fitDataset } from '../../../main/services/fitService.js';
import { addPosthoc } from '../../../main/services/fitPosthoc.js';
import { fitSeeds } from '../../../main/services/fitSeeds.js';
import { ProjectStore } from '../../../main/services/projectStore.js';
import { engineWorkerPath, ensureBuilt, resourcesDir } from './build.js';

beforeAll(() => ensureBuilt(), 300_000);

const SHORT = { searchMinIterations: 40, searchMaxIterations: 60, averagingIterations: 30 };
/** Long enough to be caught mid-fit (several seconds on the demo data). */
const LONG = { searchMinIterations: 4000, searchMaxIterations: 4000, autoEndSearch: false, averagingIterations: 200 };

/** A record as JSON without its wall and CPU times. */
const withoutTimes = (r: unknown) => JSON.parse(JSON.stringify(r, (k, v) => (k === 'timing' || /Ms$/.test(k) ? undefined : v)));

const open: FitQueue[] = [];
afterEach(async () => {
  for (const q of open.splice(0)) await q.close();
});

async function setup(concurrency: number, worker: Partial<Parameters<typeof FitQueue.open>[1]['worker']> = {}) {
  const dir = mkdtempSync(path.join(tmpdir(), 'plateau-queue-'));
  const store = await ProjectStore.open(dir, { create: 'demo', resourcesDir });
  const q = await FitQueue.open(store, { concurrency, worker: { modulePath: engineWorkerPath, ...worker } });
  open.push(q);
  return { dir, store, q, datasetId: store.project.datasets[0].id, modelId: store.project.models[0].id };
}

function waitFor(q: FitQueue, pred: (s: QueueSnapshot) => boolean, timeoutMs = 60_000): Promise<QueueSnapshot> {
  return new Promise((resolve, reject) => {
    const now = q.snapshot();
    if (pred(now)) return resolve(now);
    const timer = setTimeout(() => (off(), reject(new Error(`timed out: ${JSON.stringify(q.snapshot().jobs.map((j) => [j.state, j.progress?.phase, j.error?.message]))}`))), timeoutMs);
    const off = q.onQueue((s) => {
      if (pred(s)) {
        clearTimeout(timer);
        off();
        resolve(s);
      }
    });
  });
}

function waitForProgress(q: FitQueue, jobId: string, pred: (phase: string, iteration: number) => boolean): Promise<void> {
  return new Promise((resolve) => {
    const seen = q.snapshot().jobs.find((j) => j.id === jobId)?.progress;
    if (seen && pred(seen.phase, seen.iteration)) return resolve();
    const off = q.onProgress((p) => {
      if (p.jobId === jobId && pred(p.phase, p.iteration)) {
        off();
        resolve();
      }
    });
  });
}

describe('fit queue with real workers', () => {
  it('runs a multi-seed job and two single-seed jobs, two cores at a time, with the same results as the in-process path', async () => {
    const { store, q, datasetId, modelId } = await setup(2);
    let maxRunning = 0;
    let maxSlots = 0;
    q.onQueue((s) => (maxRunning = Math.max(maxRunning, s.jobs.filter((j) => j.state === 'running').length)));
    q.onProgress(() => (maxSlots = Math.max(maxSlots, q.slots.inUse)));
    const [multi] = await q.enqueue({ datasetId, modelId, seeds: [11, 12], settings: SHORT });
    const [single] = await q.enqueue({ datasetId, modelId, seeds: [13], settings: SHORT, postFit: { run: false } });
    const [withPost] = await q.enqueue({ datasetId, modelId, seeds: [14], settings: SHORT, postFit: { run: true } });
    expect(q.snapshot().jobs.map((j) => j.seeds)).toEqual([[11, 12], [13], [14]]);
    await q.whenIdle();
    const snap = q.snapshot();
    expect(snap.jobs.map((j) => j.state)).toEqual(['done', 'done', 'done']);
    expect(maxRunning).toBe(2);
    expect(maxSlots).toBeLessThanOrEqual(2);
    expect(q.slots.inUse).toBe(0);
    const dataset = await store.getDataset(datasetId);
    const spec = (await store.getModel(modelId)).spec;
    const fitOf = (id: string) => store.getFit(snap.jobs.find((j) => j.id === id)!.fitId!);
    // The multi-seed job: the same record as fitSeeds in this process, seeds' verdict included.
    const fromQueue = await fitOf(multi);
    const inProcess = await fitSeeds(dataset, spec, { seeds: [11, 12], settings: SHORT });
    expect(withoutTimes(fromQueue)).toEqual(withoutTimes(inProcess));
    expect((fromQueue.seeds as { seeds: number[] }).seeds).toEqual([11, 12]);
    const summary = store.project.fits.find((f) => f.id === snap.jobs[0].fitId)!;
    expect(summary.verdict).toBe(inProcess.seeds.verdict);
    const direct = await fitDataset(dataset, spec, { seed: 13, settings: SHORT });
    expect((await fitOf(single)).population).toEqual(JSON.parse(JSON.stringify(direct.record.population)));
    const directPost = await addPosthoc(await fitDataset(dataset, spec, { seed: 14, settings: SHORT }));
    const post = await fitOf(withPost);
    expect(post.population).toEqual(JSON.parse(JSON.stringify(directPost.population)));
    expect(post.likelihood).toEqual(JSON.parse(JSON.stringify(directPost.likelihood)));
    const audit = await store.readAudit();
    expect(audit.filter((a) => a.action === 'fit.save').map((a) => a.seed).sort()).toEqual([inProcess.seed, 13, 14].sort());
  }, 180_000);

  it('fails only the job whose worker was killed (SIGKILL), with the reason', async () => {
    const { q, datasetId, modelId } = await setup(2);
    const [victim] = await q.enqueue({ datasetId, modelId, seeds: [1], settings: LONG, postFit: { run: false } });
    const [survivor] = await q.enqueue({ datasetId, modelId, seeds: [2], settings: SHORT, postFit: { run: false } });
    await waitForProgress(q, victim, (phase, it) => phase === 'search' && it > 5);
    process.kill(q.workerPid(victim)!, 'SIGKILL');
    const snap = await waitFor(q, (s) => s.jobs.every((j) => j.state === 'done' || j.state === 'failed'));
    const v = snap.jobs.find((j) => j.id === victim)!;
    expect(v.state).toBe('failed');
    expect(v.error!.kind).toBe('worker');
    expect(v.error!.message).toMatch(/SIGKILL/);
    expect(snap.jobs.find((j) => j.id === survivor)!.state).toBe('done');
  }, 120_000);

  it('detects a worker that stops answering and fails its job', async () => {
    const { q, datasetId, modelId } = await setup(1, { heartbeatTimeoutMs: 1500 });
    const [job] = await q.enqueue({ datasetId, modelId, seeds: [3], settings: LONG, postFit: { run: false } });
    await waitForProgress(q, job, (phase) => phase === 'search');
    const pid = q.workerPid(job)!;
    process.kill(pid, 'SIGSTOP');
    const snap = await waitFor(q, (s) => s.jobs[0].state === 'failed', 20_000);
    expect(snap.jobs[0].error!.message).toMatch(/stopped answering/);
    // The silent process was killed, not left behind.
    await new Promise((r) => setTimeout(r, 200));
    expect(() => process.kill(pid, 0)).toThrow();
  }, 60_000);

  it('restores the queue after a restart and resumes it', async () => {
    const { dir, q, datasetId, modelId } = await setup(1);
    const [first] = await q.enqueue({ datasetId, modelId, seeds: [21], settings: LONG, postFit: { run: false } });
    await q.enqueue({ datasetId, modelId, seeds: [22, 23], settings: SHORT, postFit: { run: false } });
    await waitForProgress(q, first, (phase) => phase === 'search');
    await q.close(); // as if the app stopped while the first job ran
    const store2 = await ProjectStore.open(dir);
    const q2 = await FitQueue.open(store2, { concurrency: 1, autoStart: false, worker: { modulePath: engineWorkerPath } });
    open.push(q2);
    const before = q2.snapshot();
    expect(before.jobs.map((j) => [j.seeds, j.state])).toEqual([
      [[21], 'queued'],
      [[22, 23], 'queued'],
    ]);
    expect(q2.notes.join(' ')).toMatch(/queued again/);
    await q2.cancel(first); // the long one: not needed for the check
    // Without seeds, a job fits the model's default seed count from its seed.
    const [byDefault] = await q2.enqueue({ datasetId, modelId, settings: { ...SHORT, seed: 40 } });
    expect(q2.snapshot().jobs.find((j) => j.id === byDefault)!.seeds).toEqual([40, 41, 42]);
    await q2.cancel(byDefault);
    await expect(q2.enqueue({ datasetId, modelId, seeds: [5, 5] })).rejects.toThrow(/must differ/);
    q2.start();
    await q2.whenIdle();
    expect(q2.snapshot().jobs.map((j) => j.state)).toEqual(['cancelled', 'done', 'cancelled']);
  }, 120_000);

  it('opens a queue saved with the removed repeated-fits option, drops it and says so', async () => {
    const { dir, store, q, datasetId, modelId } = await setup(1);
    await q.close();
    await store.writeQueueFile({ format: 'plateau-queue', schemaVersion: 1, jobs: [{ id: 'j1', label: 'old', datasetId, modelId, seed: 7, seeds: [7], postFit: { run: true, repeat: 3 }, state: 'cancelled', createdAt: new Date().toISOString() }] });
    const q2 = await FitQueue.open(await ProjectStore.open(dir), { concurrency: 1, autoStart: false, worker: { modulePath: engineWorkerPath } });
    open.push(q2);
    expect(q2.snapshot().jobs.map((j) => [j.id, j.state])).toEqual([['j1', 'cancelled']]);
    expect(q2.notes.join(' ')).toMatch(/1 fit job\(s\) .*repeated fits, which are no longer run/);
  }, 60_000);

  it('cancels within 1 s mid-fit and mid-post-fit', async () => {
    const { q, datasetId, modelId } = await setup(2);
    const [midFit] = await q.enqueue({ datasetId, modelId, seeds: [31], settings: LONG, postFit: { run: false } });
    await waitForProgress(q, midFit, (phase, it) => phase === 'search' && it > 10);
    let t0 = performance.now();
    await q.cancel(midFit);
    await waitFor(q, (s) => s.jobs.find((j) => j.id === midFit)!.state === 'cancelled');
    const fitCancelMs = performance.now() - t0;
    // Queued only now, so its post-fit steps are caught running when cancelled.
    const [midPost] = await q.enqueue({ datasetId, modelId, seeds: [32], settings: SHORT, postFit: { run: true } });
    await waitForProgress(q, midPost, (phase) => phase === 'post-fit');
    t0 = performance.now();
    await q.cancel(midPost);
    const snap = await waitFor(q, (s) => s.jobs.find((j) => j.id === midPost)!.state === 'cancelled');
    const postCancelMs = performance.now() - t0;
    expect(fitCancelMs).toBeLessThan(1000);
    expect(postCancelMs).toBeLessThan(1000);
    expect(snap.jobs.every((j) => j.state === 'cancelled')).toBe(true);
  }, 120_000);
});
