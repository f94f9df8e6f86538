/** The shared core scheduler (main/services/coreSlots.ts): capacity, first-come order, cancel. */
import { describe, expect, it } from 'vitest';
import { CoreSlots } from '../../../main/services/coreSlots.js';

const tick = () => new Promise((r) => setImmediate(r));

describe('CoreSlots', () => {
  it('grants at most `capacity` slots and serves waiters in the order they asked', async () => {
    const slots = new CoreSlots(2);
    const order: string[] = [];
    const a = await slots.acquire();
    const b = await slots.acquire();
    expect(slots.inUse).toBe(2);
    const c = slots.acquire().then((r) => (order.push('c'), r));
    const d = slots.acquire().then((r) => (order.push('d'), r));
    await tick();
    expect(order).toEqual([]);
    a();
    a(); // a second release of the same slot does nothing
    await tick();
    expect(order).toEqual(['c']);
    b();
    await tick();
    expect(order).toEqual(['c', 'd']);
    (await c)();
    (await d)();
    expect(slots.inUse).toBe(0);
  });

  it('a waiter whose signal aborts leaves the line; withSlot releases on failure', async () => {
    const slots = new CoreSlots(1);
    const held = await slots.acquire();
    const ctl = new AbortController();
    const waiting = slots.acquire(ctl.signal);
    ctl.abort();
    await expect(waiting).rejects.toMatchObject({ name: 'AbortError' });
    held();
    expect(slots.inUse).toBe(0);
    await expect(slots.withSlot(async () => { throw new Error('boom'); })).rejects.toThrow('boom');
    expect(slots.inUse).toBe(0);
    expect(() => new CoreSlots(0)).toThrow(/capacity/);
  });

  it('tryAcquire takes a free slot only when nobody waits', async () => {
    const slots = new CoreSlots(2);
    const a = slots.tryAcquire();
    expect(a).not.toBeNull();
    const b = await slots.acquire();
    expect(slots.tryAcquire()).toBeNull(); // none free
    const waiting = slots.acquire();
    a!();
    // The freed slot went to the waiter, so none is free for tryAcquire.
    expect(slots.tryAcquire()).toBeNull();
    (await waiting)();
    b();
    expect(slots.inUse).toBe(0);
  });
});
