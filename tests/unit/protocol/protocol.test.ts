/** The bridge protocol: every channel has a schema, good requests pass, malformed ones are refused with a reason. */
import { describe, expect, it } from 'vitest';
import { BRIDGE_METHODS, CHANNELS, FromWorkerSchema, guardPlainData, ToWorkerSchema, validateRequest, WORKER_LIMITS } from '../../../main/protocol/index.js';

describe('bridge protocol', () => {
  it('has a method for every channel and a channel for every method', () => {
    expect(new Set(Object.values(BRIDGE_METHODS))).toEqual(new Set(CHANNELS));
    expect(Object.keys(BRIDGE_METHODS).length).toBe(CHANNELS.length);
  });

  it('accepts well-formed requests', () => {
    expect(validateRequest('app.info', undefined).ok).toBe(true);
    expect(validateRequest('app.info', {}).ok).toBe(true);
    expect(validateRequest('queue.enqueue', { datasetId: 'd1', modelId: 'm1', seeds: [1, 2], settings: { averagingIterations: 50 } }).ok).toBe(true);
    expect(validateRequest('import.parse', { fileName: 'a.csv', bytesBase64: Buffer.from('id,time\n').toString('base64') }).ok).toBe(true);
    expect(validateRequest('dosing.advise', { prior: { fitId: 'f1' }, patient: { id: 'P1' }, target: 'vancomycin-auc24' }).ok).toBe(true);
  });

  it('refuses unknown channels, extra keys, wrong types and prototype keys with a usage error', () => {
    const cases: [unknown, unknown][] = [
      ['nope', {}],
      ['__proto__', {}],
      ['queue.enqueue', { datasetId: 'd1', modelId: 'm1', extra: 1 }],
      ['queue.enqueue', { datasetId: 'd1', modelId: 'm1', settings: { averagingIterations: 1e9 } }],
      ['queue.cancel', { jobId: '../etc/passwd' }],
      ['queue.cancel', JSON.parse('{"jobId":"a","__proto__":{"polluted":true}}')],
      ['dosing.advise', { prior: { fitId: 'f1' }, patient: JSON.parse('{"constructor":{"prototype":{"x":1}}}') }],
      ['app.info', { a: 1 }],
    ];
    for (const [channel, payload] of cases) {
      const r = validateRequest(channel, payload);
      expect(r.ok, JSON.stringify([channel, payload])).toBe(false);
      if (!r.ok) {
        expect(r.error.kind).toBe('usage');
        expect(r.error.message.length).toBeGreaterThan(10);
      }
    }
    expect(({} as Record<string, unknown>).polluted).toBeUndefined();
  });

  it('guards depth, size and non-plain values without recursion', () => {
    let deep: unknown = 1;
    for (let i = 0; i < 100_000; i++) deep = [deep];
    expect(guardPlainData(deep)).toMatch(/deeper/);
    expect(guardPlainData({ s: 'x'.repeat(81 * 1024 * 1024) })).toMatch(/larger/);
    expect(guardPlainData(new Map())).toMatch(/plain/);
    expect(guardPlainData({ f: () => 1 })).toMatch(/function/);
    expect(guardPlainData({ b: new Uint8Array(3) })).toMatch(/binary/);
    expect(guardPlainData({ b: new Uint8Array(3) }, WORKER_LIMITS)).toBeUndefined();
    const withGetter = Object.defineProperty({}, 'x', { get: () => 1, enumerable: true });
    expect(guardPlainData(withGetter)).toMatch(/accessor/);
  });

  it('checks worker messages both ways', () => {
    expect(ToWorkerSchema.safeParse({ type: 'cancel', jobId: 'j' }).success).toBe(true);
    expect(ToWorkerSchema.safeParse({ type: 'job', jobId: 'j', job: { kind: 'probe', mode: 'echo', value: 3 } }).success).toBe(true);
    expect(ToWorkerSchema.safeParse({ type: 'job', jobId: 'j', job: { kind: 'rm -rf' } }).success).toBe(false);
    expect(FromWorkerSchema.safeParse({ type: 'result', jobId: 'j', ok: false, error: { kind: 'data', message: 'm', problems: [] } }).success).toBe(true);
    expect(FromWorkerSchema.safeParse({ type: 'result', jobId: 'j', ok: false, error: { kind: 'evil', message: 'm', problems: [] } }).success).toBe(false);
  });
});
