import { describe, expect, it } from 'vitest';
import { Id } from '../../../main/protocol/schemas.js';
import { newRequestId, RunningRequest } from '../../../renderer/src/lib/bridge/cancellable.js';

describe('cancellable engine requests (renderer side)', () => {
  it('mints ids the protocol accepts, each different', () => {
    const ids = new Set<string>();
    for (let i = 0; i < 1000; i++) {
      const id = newRequestId('advise');
      expect(Id.safeParse(id).success, id).toBe(true);
      ids.add(id);
    }
    expect(ids.size).toBe(1000);
  });

  it('sends the cancel for the running request, and for the one a newer request replaces', async () => {
    const sent: string[] = [];
    const r = new RunningRequest('import', async (id) => sent.push(id));
    const a = r.start();
    const b = r.start();
    expect(sent).toEqual([a]);
    r.stop();
    expect(sent).toEqual([a, b]);
    r.stop();
    expect(sent).toEqual([a, b]);
  });

  it('sends nothing once the answer has arrived', () => {
    const sent: string[] = [];
    const r = new RunningRequest('advise', async (id) => sent.push(id));
    const a = r.start();
    r.done(a);
    r.stop();
    expect(sent).toEqual([]);
    expect(r.id).toBeNull();
  });

  it('a failing cancel does not throw', () => {
    const r = new RunningRequest('advise', () => Promise.reject(new Error('socket closed')));
    r.start();
    expect(() => r.stop()).not.toThrow();
  });
});
