/**
 * Entry of one block thread of a fit (main/worker/saemThreads.ts): prepares its subjects'
 * state from workerData (the estimator's, or the post-fit steps' when its role says so), says
 * 'ready', then serves the fit's tasks until told to stop.
 */
import { parentPort, workerData } from 'node:worker_threads';
import { preparePosthocThread, type PosthocThreadInit } from '../../engine/posthoc/threads.js';
import { prepareBlockThread, type BlockThreadInit } from '../../engine/saem/threads.js';

let thread: { serve(): void } | null = null;
try {
  const init = workerData as BlockThreadInit | PosthocThreadInit;
  thread = 'role' in init && init.role === 'posthoc' ? preparePosthocThread(init) : prepareBlockThread(init as BlockThreadInit);
} catch (e) {
  parentPort!.postMessage({ error: (e as Error)?.message ?? String(e) });
}
if (thread) {
  parentPort!.postMessage('ready');
  thread.serve();
}
