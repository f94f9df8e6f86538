/**
 * The renderer's WebSocket bridge client against a real `ws` server speaking the bridge's wire
 * format ({id, channel, payload} -> {id, ok, value | error}; events {event, payload}).
 */
import { afterEach, describe, expect, it } from 'vitest';
import { WebSocket, WebSocketServer } from 'ws';
import { BridgeError, createWebSocketTransport, tokenFromPage } from '../../../renderer/src/lib/bridge/transport.js';

let server: WebSocketServer | undefined;
afterEach(async () => {
  for (const c of server?.clients ?? []) c.terminate();
  await new Promise<void>((r) => (server ? server.close(() => r()) : r()));
  server = undefined;
});

async function listen(onMessage: (socket: import('ws').WebSocket, msg: { id: string; channel: string; payload: unknown }) => void): Promise<string> {
  server = new WebSocketServer({ host: '127.0.0.1', port: 0 });
  server.on('connection', (socket) => socket.on('message', (data) => onMessage(socket, JSON.parse(String(data)))));
  await new Promise((r) => server!.once('listening', r));
  const { port } = server.address() as { port: number };
  return `ws://127.0.0.1:${port}/ws`;
}

describe('renderer bridge transport', () => {
  it('answers requests by id, rejects service errors with their kind and problems, and delivers events', async () => {
    const url = await listen((socket, m) => {
      if (m.channel === 'app.info') {
        socket.send(JSON.stringify({ event: 'queue', payload: { jobs: [], concurrency: 1 } }));
        socket.send(JSON.stringify({ id: m.id, ok: true, value: { appVersion: '0.1.0' } }));
      } else socket.send(JSON.stringify({ id: m.id, ok: false, error: { kind: 'usage', message: 'no such dataset', problems: ['datasetId'] } }));
    });
    const t = createWebSocketTransport(url, WebSocket as unknown as typeof globalThis.WebSocket);
    const events: unknown[] = [];
    t.subscribe('queue', (p) => events.push(p));
    // Two requests in flight at once, answered out of order of kind: each gets its own answer.
    const [info, failed] = await Promise.allSettled([t.request('app.info', {}), t.request('dataset.get', { datasetId: 'x' })]);
    expect(info).toEqual({ status: 'fulfilled', value: { appVersion: '0.1.0' } });
    expect(failed.status).toBe('rejected');
    const err = (failed as PromiseRejectedResult).reason as BridgeError;
    expect(err).toBeInstanceOf(BridgeError);
    expect(err.kind).toBe('usage');
    expect(err.message).toBe('no such dataset');
    expect(err.problems).toEqual(['datasetId']);
    expect(events).toEqual([{ jobs: [], concurrency: 1 }]);
  });

  it('fails pending requests with a message saying what to do when the connection closes', async () => {
    const url = await listen((socket) => socket.close());
    const t = createWebSocketTransport(url, WebSocket as unknown as typeof globalThis.WebSocket);
    await expect(t.request('app.info', {})).rejects.toThrow(/connection to Plateau closed.*Restart it/);
  });

  it('takes the token from the address, then from a cookie', () => {
    expect(tokenFromPage({ search: '?token=abc', hash: '' }, '')).toBe('abc');
    expect(tokenFromPage({ search: '', hash: '' }, 'x=1; plateau_token=t%2B1')).toBe('t+1');
    expect(tokenFromPage({ search: '', hash: '' }, '')).toBeUndefined();
  });
});
