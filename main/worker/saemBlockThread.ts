/**
 * Entry of one block thread of a fit (main/worker/saemThreads.ts): prepares its subjects'
 * state from workerData, says 'ready', then serves the fit's tasks until told to stop.
 */
import { parentPort, workerData } from 'node:worker_threads';
import { prepareBlockThread, type BlockThreadInit } from '../../engine/saem/threads.js';

let thread: ReturnType<typeof prepareBlockThread> | null = null;
try {
  thread = prepareBlockThread(workerData as BlockThreadInit);
} catch (e) {
  parentPort!.postMessage({ error: (e as Error)?.message ?? String(e) });
}
if (thread) {
  parentPort!.postMessage('ready');
  thread.serve();
}
