/**
 * The job thread of the engine worker process (docs/architecture.md, "Processes"): runs one
 * engine job at a time, sent by the process's main thread, which keeps answering (heartbeat,
 * cancel) even while a synchronous post-fit step runs here, and cancels by terminating this
 * thread. A thread that finished its job cleanly is kept for the next one (module loading is
 * the larger part of a small job's cost). Progress is throttled here (at most one message per
 * PROGRESS_MIN_INTERVAL_MS, and on every phase change). Nothing thrown leaves the thread: every
 * outcome is a result message.
 */
import { parentPort } from 'node:worker_threads';
import { PROGRESS_MIN_INTERVAL_MS } from '../protocol/timing.js';
import type { FromWorker, JobRequest } from '../protocol/worker.js';
import { toErrorValue } from '../services/serviceError.js';
import { runJob, type JobProgress } from './jobs.js';

const post = (m: FromWorker) => parentPort!.postMessage(m);

parentPort!.on('message', ({ jobId, job }: { jobId: string; job: JobRequest }) => {
  let lastAt = 0;
  let lastPhase = '';
  const onProgress = (p: JobProgress): void => {
    const now = Date.now();
    // A verification check's start and end are always sent (two per check): the list on screen
    // must show every check's state, not a sample.
    if (!p.check && now - lastAt < PROGRESS_MIN_INTERVAL_MS && p.phase === lastPhase) return;
    lastAt = now;
    lastPhase = p.phase;
    post({ type: 'progress', progress: { jobId, ...p } });
  };
  const cpu0 = process.cpuUsage();
  const t0 = performance.now();
  runJob(job, { jobId, onProgress }).then(
    (value) => {
      const cpu = process.cpuUsage(cpu0);
      post({ type: 'result', jobId, ok: true, value, timing: { cpuMs: (cpu.user + cpu.system) / 1000, wallMs: performance.now() - t0 } });
    },
    (e: unknown) => post({ type: 'result', jobId, ok: false, error: toErrorValue(e) }),
  );
});
