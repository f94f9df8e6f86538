/**
 * The web host with the real application services: a browser-like WebSocket client (token in
 * the URL, our own Origin) drives the bridge protocol; a fit started over the socket runs in a
 * real worker process and streams progress and queue events. Malformed messages are answered
 * with 'usage' errors and the connection stays up.
 */
import { mkdtempSync, mkdirSync, rmSync, writeFileSync } from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import WebSocket from 'ws';
import { startAppBackend, type RunningBackend } from '../../../main/webhost/appBackend.js';
import { appPathsFromRoot } from '../../../main/webhost/appPaths.js';
import { startWebHost, type WebHost } from '../../../main/webhost/server.js';
import { ensureBuilt, repoRoot } from './built.js';

interface Message {
  id?: string | null;
  ok?: boolean;
  value?: any;
  error?: { kind: string; message: string; problems: string[] };
  event?: string;
  payload?: any;
}

class Client {
  private next = 0;
  private waiting = new Map<string, (m: Message) => void>();
  readonly events: Message[] = [];
  readonly orphans: Message[] = [];
  private eventWaiters: { test: (m: Message) => boolean; resolve: (m: Message) => void }[] = [];
  constructor(readonly socket: WebSocket) {
    socket.on('message', (data) => {
      const m = JSON.parse(String(data)) as Message;
      if (m.event !== undefined) {
        this.events.push(m);
        this.eventWaiters = this.eventWaiters.filter((w) => (w.test(m) ? (w.resolve(m), false) : true));
      } else if (typeof m.id === 'string' && this.waiting.has(m.id)) {
        this.waiting.get(m.id)!(m);
        this.waiting.delete(m.id);
      } else this.orphans.push(m);
    });
  }
  static open(url: string, origin: string): Promise<Client> {
    return new Promise((resolve, reject) => {
      const socket = new WebSocket(url, { headers: { Origin: origin } });
      socket.once('open', () => resolve(new Client(socket)));
      socket.once('error', reject);
    });
  }
  request(channel: string, payload?: unknown): Promise<Message> {
    const id = `r${++this.next}`;
    return this.raw({ id, channel, payload }, id);
  }
  raw(message: unknown, id: string): Promise<Message> {
    return new Promise((resolve) => {
      this.waiting.set(id, resolve);
      this.socket.send(typeof message === 'string' ? message : JSON.stringify(message));
    });
  }
  nextOrphan(): Promise<Message> {
    const have = this.orphans.length;
    return new Promise((resolve) => {
      const poll = setInterval(() => {
        if (this.orphans.length > have) {
          clearInterval(poll);
          resolve(this.orphans[have]);
        }
      }, 5);
    });
  }
  waitForEvent(test: (m: Message) => boolean): Promise<Message> {
    const seen = this.events.find(test);
    if (seen) return Promise.resolve(seen);
    return new Promise((resolve) => this.eventWaiters.push({ test, resolve }));
  }
}

let dir: string;
let services: RunningBackend;
let host: WebHost;
let client: Client;
const logged: string[] = [];

beforeAll(async () => {
  ensureBuilt();
  dir = mkdtempSync(path.join(os.tmpdir(), 'plateau-webbridge-'));
  const rendererDir = path.join(dir, 'renderer');
  mkdirSync(rendererDir);
  writeFileSync(path.join(rendererDir, 'index.html'), '<!doctype html><title>Plateau</title>');
  const paths = appPathsFromRoot(repoRoot, { rendererDir });
  const log = (l: string) => void logged.push(l);
  services = await startAppBackend({ paths, projectDir: path.join(dir, 'project'), host: 'web', appVersion: '0.0.0-test', log });
  host = await startWebHost({ rendererDir, backend: services.backend, log });
  client = await Client.open(`ws://127.0.0.1:${host.port}/ws?token=${host.token}`, `http://127.0.0.1:${host.port}`);
}, 300_000);

afterAll(async () => {
  client?.socket.close();
  await host?.close();
  await services?.stop();
  rmSync(dir, { recursive: true, force: true });
});

describe('bridge over the WebSocket', () => {
  it('answers app.info and project.summary from the services (demo project on first run)', async () => {
    const info = await client.request('app.info');
    expect(info.ok).toBe(true);
    expect(info.value).toMatchObject({ host: 'web', appVersion: '0.0.0-test', projectPath: path.join(dir, 'project') });
    expect(info.value.caution.text.length).toBeGreaterThan(50);
    const summary = await client.request('project.summary');
    expect(summary.ok).toBe(true);
    expect(summary.value.datasets.length).toBeGreaterThanOrEqual(1);
    expect(summary.value.models.length).toBeGreaterThanOrEqual(1);
  });

  it('refuses malformed, unknown and hostile messages with usage errors and keeps the connection', async () => {
    const cases: [unknown, string][] = [
      [{ id: 'u1', channel: 'no.such.channel', payload: {} }, 'u1'],
      [{ id: 'u2', channel: 'queue.cancel', payload: { jobId: 42 } }, 'u2'],
      [{ id: 'u3', channel: 'app.info', payload: {}, extra: true }, 'u3'],
      ['{"id":"u4","channel":"models.save","payload":{"name":"x","spec":{"__proto__":{"polluted":1}}}}', 'u4'],
      [{ id: 'u5', channel: 'import.parse', payload: { fileName: 'x.csv', bytesBase64: 'not base64 !' } }, 'u5'],
    ];
    for (const [message, id] of cases) {
      const reply = await client.raw(message, id);
      expect(reply.ok, JSON.stringify(message).slice(0, 80)).toBe(false);
      expect(reply.error!.kind).toBe('usage');
    }
    expect(({} as Record<string, unknown>).polluted).toBeUndefined();
    // Not JSON, and an envelope without an id: answered with id null.
    client.socket.send('{not json');
    expect((await client.nextOrphan()).error!.kind).toBe('usage');
    client.socket.send(JSON.stringify({ channel: 'app.info' }));
    expect((await client.nextOrphan()).error!.kind).toBe('usage');
    expect((await client.request('app.info')).ok).toBe(true);
    expect(logged.some((l) => l.includes('refused'))).toBe(true);
  });

  it('acknowledges subscription messages', async () => {
    expect(await client.raw({ id: 's1', subscribe: 'progress' }, 's1')).toMatchObject({ id: 's1', ok: true });
  });

  it('a fit started over the socket runs in a worker and streams progress and queue events', async () => {
    const summary = (await client.request('project.summary')).value;
    const enqueued = await client.request('queue.enqueue', {
      datasetId: summary.datasets[0].id,
      modelId: summary.models[0].id,
      seeds: [3],
      settings: { explorationMinIterations: 30, explorationMaxIterations: 40, averagingIterations: 20 },
    });
    expect(enqueued.ok, JSON.stringify(enqueued.error)).toBe(true);
    const jobId = enqueued.value.jobId as string;
    const progress = await client.waitForEvent((m) => m.event === 'progress' && m.payload.jobId === jobId);
    expect(['search', 'averaging', 'post-fit']).toContain(progress.payload.phase);
    expect(progress.payload.iteration).toBeGreaterThanOrEqual(0);
    expect(Object.keys(progress.payload.estimates ?? {}).length).toBeGreaterThan(0);
    const finished = await client.waitForEvent((m) => m.event === 'queue' && m.payload.jobs.some((j: any) => j.id === jobId && ['done', 'failed', 'cancelled'].includes(j.state)));
    const job = finished.payload.jobs.find((j: any) => j.id === jobId);
    expect(job.state, JSON.stringify(job.error)).toBe('done');
    const fit = await client.request('fits.get', { fitId: job.fitId });
    expect(fit.ok).toBe(true);
    expect(Number.isFinite(fit.value.record.likelihood?.minus2LL ?? fit.value.record.population?.[0]?.estimate)).toBe(true);
  }, 240_000);
});
