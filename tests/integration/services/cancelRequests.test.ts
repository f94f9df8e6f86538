/**
 * Cancel of dose advice and of reading a file stops the job in its worker, not only the answer:
 * the worker process is watched through the spawning interface (every message both ways and its
 * exit), and after dosing.cancel / import.cancel the worker must answer the job as cancelled
 * and its process must be gone, long before the job could have finished on its own.
 */
import { mkdtempSync, readFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Result } from '../../../main/protocol/bridge.js';
import { AppService } from '../../../main/services/appService.js';
import { spawnNodeWorker, type SpawnWorker } from '../../../main/services/workerSpawner.js';
import { engineWorkerPath, ensureBuilt, repoRoot, resourcesDir } from './build.js';

interface Watched {
  pid: number | undefined;
  jobs: string[];
  cancels: string[];
  results: { jobId: string; ok: boolean; kind?: string }[];
  exited: Promise<number>;
}
const workers: Watched[] = [];
const watchingSpawn: SpawnWorker = (entry) => {
  const h = spawnNodeWorker(entry);
  let exitedAt!: (t: number) => void;
  const w: Watched = { pid: undefined, jobs: [], cancels: [], results: [], exited: new Promise((r) => (exitedAt = r)) };
  workers.push(w);
  h.onExit(() => exitedAt(Date.now()));
  h.onMessage((m) => {
    const msg = m as { type: string; pid?: number; jobId?: string; ok?: boolean; error?: { kind: string } };
    if (msg.type === 'ready') w.pid = msg.pid;
    if (msg.type === 'result') w.results.push({ jobId: msg.jobId!, ok: msg.ok!, ...(msg.error ? { kind: msg.error.kind } : {}) });
  });
  return {
    ...h,
    pid: h.pid,
    postMessage(m) {
      const msg = m as { type: string; jobId: string };
      if (msg.type === 'job') w.jobs.push(msg.jobId);
      if (msg.type === 'cancel') w.cancels.push(msg.jobId);
      h.postMessage(m);
    },
  };
};

function alive(pid: number): boolean {
  try {
    process.kill(pid, 0);
    return true;
  } catch {
    return false;
  }
}

let app: AppService;
const dir = mkdtempSync(path.join(tmpdir(), 'plateau-cancel-'));
beforeAll(async () => {
  ensureBuilt();
  app = await AppService.start({ workerEntry: engineWorkerPath, resourcesDir, projectDir: dir, host: 'web', concurrency: 1, spawn: watchingSpawn, log: () => undefined });
}, 300_000);
afterAll(async () => app?.close());

/** Start a request, wait until its worker has the job, cancel, and check that the job and its process ended. */
async function cancelMidJob(channel: 'dosing.advise' | 'import.parse', payload: Record<string, unknown>, cancelChannel: 'dosing.cancel' | 'import.cancel', requestId: string) {
  const before = workers.length;
  const startedAt = Date.now();
  const answer = app.handle(channel, { ...payload, requestId }) as Promise<Result<unknown>>;
  await expect.poll(() => workers[before]?.jobs.length ?? 0, { timeout: 20_000, interval: 20 }).toBe(1);
  const w = workers[before];
  // Let the job get going in its thread before stopping it.
  await new Promise((r) => setTimeout(r, 300));
  expect(w.results).toEqual([]);
  expect(app.runningRequests).toBe(1);
  const cancelledAt = Date.now();
  const c = (await app.handle(cancelChannel, { requestId })) as Result<{ cancelled: boolean }>;
  expect(c).toEqual({ ok: true, value: { cancelled: true } });
  const r = await answer;
  expect(r.ok).toBe(false);
  if (!r.ok) expect(r.error.kind).toBe('cancelled');
  // The worker itself sent the cancel to the job and answered it as cancelled ...
  expect(w.cancels).toEqual(w.jobs);
  expect(w.results).toEqual([{ jobId: w.jobs[0], ok: false, kind: 'cancelled' }]);
  // ... and its process ended within a second or two of the cancel.
  const exitedAt = await w.exited;
  expect(exitedAt - cancelledAt).toBeLessThan(2_000);
  expect(alive(w.pid!)).toBe(false);
  expect(app.runningRequests).toBe(0);
  // Cancelling again, or a request that never ran, says so.
  expect(await app.handle(cancelChannel, { requestId })).toEqual({ ok: true, value: { cancelled: false } });
  return { startedAt, cancelledAt, w };
}

describe('cancel stops the engine job in its worker', () => {
  it('dosing.cancel ends a running dose advice job and its worker process', async () => {
    const patient = JSON.parse(readFileSync(path.join(repoRoot, 'resources/demo/patient.json'), 'utf8'));
    // The largest posterior sample the protocol allows: many seconds of work on one core.
    const payload = { prior: { literatureModelId: 'example-vancomycin-1cmt' }, patient, target: 'vancomycin-auc24', options: { draws: 20_000, overrideBlocks: true } };
    // Uncancelled, the job runs for seconds (the time a cancel 0.3 s in must cut short).
    const before = workers.length;
    const t0 = Date.now();
    const full = (await app.handle('dosing.advise', { ...payload, requestId: 'advise-test-0' })) as Result<unknown>;
    expect(full.ok).toBe(true);
    expect(Date.now() - t0).toBeGreaterThan(1_000);
    expect(workers[before].results).toEqual([{ jobId: workers[before].jobs[0], ok: true }]);
    await cancelMidJob('dosing.advise', payload, 'dosing.cancel', 'advise-test-1');
  }, 120_000);

  it('import.cancel ends a running parse job and its worker process', async () => {
    // A large text export (the demo's rows repeated under new patient ids): seconds to parse.
    const lines = readFileSync(path.join(repoRoot, 'resources/demo/ward-levels.csv'), 'utf8').trim().split('\n');
    const out = [lines[0]];
    for (let k = 0; k < 800; k++) for (const l of lines.slice(1)) out.push(l.replace(/^HX-/, `P${k}-`));
    const bytes = Buffer.from(out.join('\n') + '\n');
    await cancelMidJob('import.parse', { fileName: 'big-ward-export.csv', bytesBase64: bytes.toString('base64') }, 'import.cancel', 'import-test-1');
  }, 120_000);

  it('a cancel while the worker process is still starting ends it without running the job', async () => {
    const before = workers.length;
    const patient = JSON.parse(readFileSync(path.join(repoRoot, 'resources/demo/patient.json'), 'utf8'));
    const answer = app.handle('dosing.advise', { prior: { literatureModelId: 'example-vancomycin-1cmt' }, patient, target: 'vancomycin-auc24', requestId: 'advise-early' }) as Promise<Result<unknown>>;
    await expect.poll(() => workers.length, { timeout: 20_000, interval: 5 }).toBe(before + 1);
    const w = workers[before];
    expect(w.pid).toBeUndefined(); // not ready yet
    expect(await app.handle('dosing.cancel', { requestId: 'advise-early' })).toEqual({ ok: true, value: { cancelled: true } });
    const r = await answer;
    expect(r.ok).toBe(false);
    if (!r.ok) expect(r.error.kind).toBe('cancelled');
    await w.exited;
    expect(w.jobs).toEqual([]);
    expect(app.runningRequests).toBe(0);
  }, 60_000);

  it('refuses a cancel without a request id', async () => {
    const r = (await app.handle('dosing.cancel', {})) as Result<unknown>;
    expect(r.ok).toBe(false);
    if (!r.ok) expect(r.error.kind).toBe('usage');
  });
});
