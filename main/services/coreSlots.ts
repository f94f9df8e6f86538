/**
 * One scheduler decides who gets the cores (docs/architecture.md, "Fit queue"): a count of core
 * slots that every engine run draws from, the fit queue's jobs and the seeds of a multi-seed fit
 * alike. A run holds one slot while its worker computes; waiters are served in the order they
 * asked, so the seeds of the job first in the queue get the free cores first, and a job with 3
 * seeds uses up to 3 slots when no earlier job holds them.
 */
import * as os from 'node:os';

/** Cores of this machine (availableParallelism where Node has it). */
export function machineCores(): number {
  return Math.max(1, typeof os.availableParallelism === 'function' ? os.availableParallelism() : os.cpus().length);
}

export type ReleaseSlot = () => void;

export class CoreSlots {
  private used = 0;
  private readonly waiters: { grant: (r: ReleaseSlot) => void }[] = [];

  constructor(readonly capacity: number) {
    if (!(Number.isInteger(capacity) && capacity >= 1)) throw new RangeError(`core slots: the capacity must be an integer >= 1, got ${capacity}`);
  }

  /** Slots in use now (tests, the queue's view). */
  get inUse(): number {
    return this.used;
  }

  /**
   * Wait for a slot; resolves with its release function (call it exactly once; later calls do
   * nothing). Rejects with an AbortError when the signal aborts before a slot was granted.
   */
  acquire(signal?: AbortSignal): Promise<ReleaseSlot> {
    if (signal?.aborted) return Promise.reject(abortError());
    if (this.used < this.capacity) {
      this.used++;
      return Promise.resolve(this.releaser());
    }
    return new Promise<ReleaseSlot>((resolve, reject) => {
      const waiter = {
        grant: (r: ReleaseSlot) => {
          signal?.removeEventListener('abort', onAbort);
          resolve(r);
        },
      };
      const onAbort = () => {
        const k = this.waiters.indexOf(waiter);
        if (k >= 0) this.waiters.splice(k, 1);
        reject(abortError());
      };
      signal?.addEventListener('abort', onAbort, { once: true });
      this.waiters.push(waiter);
    });
  }

  /** A free slot now, or null when none is free or anyone is waiting (nobody is passed over). */
  tryAcquire(): ReleaseSlot | null {
    if (this.used >= this.capacity || this.waiters.length > 0) return null;
    this.used++;
    return this.releaser();
  }

  /** Run `task` while holding a slot. */
  async withSlot<T>(task: () => Promise<T>, signal?: AbortSignal): Promise<T> {
    const release = await this.acquire(signal);
    try {
      return await task();
    } finally {
      release();
    }
  }

  private releaser(): ReleaseSlot {
    let done = false;
    return () => {
      if (done) return;
      done = true;
      const next = this.waiters.shift();
      // The slot passes straight to the next waiter, so nobody can jump the line.
      if (next) next.grant(this.releaser());
      else this.used--;
    };
  }
}

function abortError(): Error {
  const e = new Error('the fit was cancelled');
  e.name = 'AbortError';
  return e;
}
