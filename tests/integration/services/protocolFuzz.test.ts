/**
 * Protocol fuzz: seeded malformed payloads (wrong types, huge strings, extra keys, prototype
 * keys, deep nesting, unknown channels) sent to the application service (main's boundary) and to
 * a real engine worker process. Each must be refused with an error value; neither side crashes,
 * and both still answer a good request afterwards.
 */
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { CHANNELS } from '../../../main/protocol/schemas.js';
import { AppService } from '../../../main/services/appService.js';
import { spawnNodeWorker } from '../../../main/services/workerSpawner.js';
import { engineWorkerPath, ensureBuilt, resourcesDir } from './build.js';

/** mulberry32: a small seeded generator for the fuzz cases (test-only). */
function rng(seed: number): () => number {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

function makeFuzzer(seed: number) {
  const r = rng(seed);
  const pick = <T>(xs: readonly T[]): T => xs[Math.floor(r() * xs.length)];
  const scalar = (): unknown =>
    pick([() => null, () => r() < 0.5, () => r() * 1e6 - 5e5, () => NaN, () => Infinity, () => -0, () => 'x'.repeat(Math.floor(r() * 300)), () => '\u0000\u202e\r\nADVICE', () => 2 ** 53 + 1, () => -1])();
  const value = (depth: number): unknown => {
    const k = r();
    if (depth > 3 || k < 0.4) return scalar();
    if (k < 0.6) return Array.from({ length: Math.floor(r() * 4) }, () => value(depth + 1));
    const o: Record<string, unknown> = {};
    for (let i = 0; i < 1 + Math.floor(r() * 4); i++) o[pick(['id', 'jobId', 'fitId', 'datasetId', 'seeds', 'settings', 'spec', 'x', 'payload', 'bytesBase64', 'fileName'])] = value(depth + 1);
    return o;
  };
  const deep = (): unknown => {
    let v: unknown = 1;
    for (let i = 0; i < 200 + Math.floor(r() * 5000); i++) v = r() < 0.5 ? [v] : { a: v };
    return v;
  };
  /** One malformed payload: always breaks its channel's schema or the guard. */
  const payload = (): unknown => {
    const kind = Math.floor(r() * 8);
    switch (kind) {
      case 0:
        return JSON.parse(`{"__proto__":{"polluted":1},"jobId":"a"}`);
      case 1:
        return JSON.parse(`{"constructor":{"prototype":{"polluted":1}},"datasetId":"d"}`);
      case 2:
        return deep();
      case 3:
        return { fileName: 'a.xlsx', bytesBase64: 'A'.repeat(1 + Math.floor(r() * 1e6)) + '!' };
      case 4:
        return { [`extra${Math.floor(r() * 100)}`]: value(0), zzUnknown: 1 };
      case 5:
        return scalar() ?? 'null-string';
      case 6:
        return [value(0)];
      default:
        return { ...(value(0) as object), unknownKey: true };
    }
  };
  const channel = (): unknown => (r() < 0.85 ? pick(CHANNELS) : pick(['', 'app', '__proto__', 'constructor', 'queue.enqueue ', 'x'.repeat(500), 42, null]));
  return { payload, channel, value };
}

let app: AppService;
beforeAll(async () => {
  ensureBuilt();
  app = await AppService.start({ workerEntry: engineWorkerPath, resourcesDir, projectDir: mkdtempSync(path.join(tmpdir(), 'plateau-fuzz-')), host: 'web', concurrency: 1, log: () => undefined });
}, 300_000);
afterAll(async () => app?.close());

describe('protocol fuzz', () => {
  it('main refuses 1,200 malformed requests with usage errors and keeps answering', async () => {
    const f = makeFuzzer(20261204);
    const counts = { tried: 0, refused: 0, accepted: 0, crashed: 0 };
    for (let i = 0; i < 1200; i++) {
      counts.tried++;
      try {
        const r = await app.handle(f.channel(), f.payload());
        if (r.ok) counts.accepted++;
        else {
          expect(r.error.kind).toBe('usage');
          counts.refused++;
        }
      } catch {
        counts.crashed++;
      }
    }
    // A huge one, once: over the size limit.
    const big = await app.handle('models.save', { name: 'x', spec: { s: 'x'.repeat(81 * 1024 * 1024) } });
    expect(big.ok).toBe(false);
    console.log(`protocol fuzz (main): ${JSON.stringify(counts)}`);
    expect(counts).toMatchObject({ crashed: 0, accepted: 0, refused: 1200 });
    expect(({} as Record<string, unknown>).polluted).toBeUndefined();
    expect((await app.handle('app.info', undefined)).ok).toBe(true);
  }, 120_000);

  it('a worker refuses 1,000 malformed messages and still runs a job', async () => {
    const f = makeFuzzer(7);
    const w = spawnNodeWorker({ modulePath: engineWorkerPath });
    const answers: unknown[] = [];
    let exited = false;
    w.onExit(() => (exited = true));
    w.onMessage((m) => {
      if ((m as { type?: string }).type === 'result') answers.push(m);
    });
    const N = 1000;
    for (let i = 0; i < N; i++) {
      const k = i % 5;
      const msg = k === 0 ? f.payload() : k === 1 ? { type: 'job', jobId: `j${i}`, job: f.value(0) } : k === 2 ? { type: 'job', jobId: `j${i}`, job: { kind: 'fit', ...(f.payload() as object) } } : k === 3 ? { type: f.value(0), jobId: f.value(0) } : { type: 'job', jobId: `j${i}`, job: { kind: 'probe', mode: 'echo' }, extra: 1 };
      w.postMessage(msg ?? null);
    }
    const t0 = Date.now();
    while (answers.length < N && Date.now() - t0 < 30_000) await new Promise((r) => setTimeout(r, 20));
    expect(exited).toBe(false);
    expect(answers).toHaveLength(N);
    for (const a of answers) expect(a).toMatchObject({ ok: false, error: { kind: 'usage' } });
    w.postMessage({ type: 'job', jobId: 'good', job: { kind: 'probe', mode: 'echo', value: 42 } });
    while (!answers.some((a) => (a as { jobId: string }).jobId === 'good') && Date.now() - t0 < 40_000) await new Promise((r) => setTimeout(r, 20));
    expect(answers.find((a) => (a as { jobId: string }).jobId === 'good')).toMatchObject({ ok: true, value: 42 });
    console.log(`protocol fuzz (worker): ${N} malformed messages refused, 0 crashes`);
    w.kill();
  }, 60_000);
});
