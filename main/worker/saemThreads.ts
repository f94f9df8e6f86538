/**
 * The Node host of a fit's block threads, for the estimator (engine/saem/threads.ts) and the
 * post-fit steps (engine/posthoc/threads.ts): each block thread is a worker_threads Worker running
 * saemBlockThread.js on its init (a post-fit init says so in its `role`). A thread that fails before it is
 * ready rejects `ready` (the fit fails with its reason); after that the engine watches the
 * threads through shared memory. Block threads end with the fit, and with the thread or process
 * that started them.
 */
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';
import { Worker, type ResourceLimits } from 'node:worker_threads';
import type { PosthocThreadHost, PosthocThreadInit } from '../../engine/posthoc/threads.js';
import type { BlockThreadHandle, BlockThreadInit, SaemThreadHost } from '../../engine/saem/threads.js';

/** One host for both: the estimator's block threads and the post-fit steps' ones. */
export interface FitThreadHost extends SaemThreadHost, PosthocThreadHost {
  start(init: BlockThreadInit | PosthocThreadInit): BlockThreadHandle;
}

/** Below this much work per iteration (levels x chains) a fit stays on one thread: starting threads would cost more than they save. */
export const THREADS_MIN_WORK = 1000;

export interface SaemThreadOptions {
  /** Heap limits of each block thread (the job thread's own, by default none). */
  resourceLimits?: ResourceLimits;
}

/** The compiled entry beside this file; from the TypeScript source (tests), the one in dist/. */
function blockThreadEntry(): string {
  const here = fileURLToPath(import.meta.url);
  return here.endsWith('.ts') ? path.resolve(path.dirname(here), '../../dist/main/worker/saemBlockThread.js') : path.join(path.dirname(here), 'saemBlockThread.js');
}
const entry = blockThreadEntry();

export function workerThreadHost(threads: number, options: SaemThreadOptions = {}): FitThreadHost {
  if (!(Number.isInteger(threads) && threads >= 1)) throw new RangeError(`threads must be an integer >= 1, got ${threads}`);
  return {
    threads,
    start(init: BlockThreadInit | PosthocThreadInit): BlockThreadHandle {
      const worker = new Worker(entry, { workerData: init, ...(options.resourceLimits ? { resourceLimits: options.resourceLimits } : {}) });
      let settled = false;
      const ready = new Promise<void>((resolve, reject) => {
        worker.once('message', (m: unknown) => {
          settled = true;
          if (m === 'ready') resolve();
          else reject(new Error(`a fit thread could not start: ${String((m as { error?: string })?.error ?? m)}`));
        });
        worker.once('exit', (code) => {
          if (!settled) reject(new Error(`a fit thread stopped before it was ready (exit code ${code})`));
          settled = true;
        });
      });
      // An error after start is seen by the engine (shared-memory watch); never let it crash the host.
      worker.on('error', () => undefined);
      return { ready, terminate: () => void worker.terminate() };
    },
  };
}

/** Threads for a fit of `levels` levels with `chains` chains per subject when `available` cores are granted. */
export function threadsForFit(available: number, levels: number, chains: number): number {
  return fitGainsFromThreads(levels, chains) ? Math.max(1, available) : 1;
}

/** Whether a fit of `levels` levels with `chains` chains per subject is large enough to gain from threads. */
export function fitGainsFromThreads(levels: number, chains: number): boolean {
  return levels * chains >= THREADS_MIN_WORK;
}

/**
 * Below this many subjects the post-fit steps stay on one thread: starting the threads and
 * compiling their subjects took about 80 ms on the 120-patient sparse design, whose post-fit
 * steps took 0.70 s on 1 thread and 0.67 s on 2; at 4,000 patients 7.9 s against 5.1 s.
 */
export const POSTHOC_THREADS_MIN_SUBJECTS = 200;

/** Threads for the post-fit steps of a fit of `subjects` subjects when `available` cores are granted. */
export function threadsForPosthoc(available: number, subjects: number): number {
  return subjects >= POSTHOC_THREADS_MIN_SUBJECTS ? Math.max(1, available) : 1;
}
