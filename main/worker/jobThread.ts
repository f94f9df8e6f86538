/**
 * One engine job in a worker thread of the engine worker process (docs/architecture.md,
 * "Processes"). The thread does the work; the process's main thread keeps answering (heartbeat,
 * cancel) even while a synchronous post-fit step runs here, and cancels by terminating this
 * thread. Progress is throttled here (at most one message per PROGRESS_MIN_INTERVAL_MS, and on
 * every phase change). Nothing thrown leaves the thread: every outcome is a result message.
 */
import { parentPort, workerData } from 'node:worker_threads';
import { PROGRESS_MIN_INTERVAL_MS, type FromWorker, type JobRequest } from '../protocol/worker.js';
import { toErrorValue } from '../services/serviceError.js';
import { runJob, type JobProgress } from './jobs.js';

const { jobId, job } = workerData as { jobId: string; job: JobRequest };
const post = (m: FromWorker) => parentPort!.postMessage(m);

let lastAt = 0;
let lastPhase = '';
function onProgress(p: JobProgress): void {
  const now = Date.now();
  if (now - lastAt < PROGRESS_MIN_INTERVAL_MS && p.phase === lastPhase) return;
  lastAt = now;
  lastPhase = p.phase;
  post({ type: 'progress', progress: { jobId, ...p } });
}

const cpu0 = process.cpuUsage();
const t0 = performance.now();
runJob(job, { jobId, onProgress }).then(
  (value) => {
    const cpu = process.cpuUsage(cpu0);
    post({ type: 'result', jobId, ok: true, value, timing: { cpuMs: (cpu.user + cpu.system) / 1000, wallMs: performance.now() - t0 } });
  },
  (e: unknown) => post({ type: 'result', jobId, ok: false, error: toErrorValue(e) }),
);
