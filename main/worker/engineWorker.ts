/**
 * The engine worker process (docs/architecture.md, "Processes"): started by
 * main/services/workerSpawner.ts (child_process.fork under Node, Electron's utilityProcess in the
 * app). Speaks the messages of main/protocol/worker.ts over the IPC channel (process.send) or
 * Electron's process.parentPort. Jobs run in heap-limited job threads (jobThreads.ts, shared with
 * `plateau fit`), so this thread stays free to send heartbeats, relay throttled progress, cancel
 * a job at once (even inside a synchronous post-fit step) and enforce the job's time limit. A
 * thread that ended its job cleanly is kept for the next one; a cancelled or failed job's thread
 * is ended. It checks every request, never lets an exception cross the process line, and exits
 * when its parent goes away.
 *
 * Arguments: --job-time-limit-ms N (default 6 h), --job-heap-mb N (default 2048).
 */
import { ENGINE_VERSION } from '../../engine/version.js';
import { guardPlainData, WORKER_LIMITS } from '../protocol/guard.js';
import { HEARTBEAT_INTERVAL_MS, ToWorkerSchema, type FromWorker, type JobRequest } from '../protocol/worker.js';
import { DEFAULT_JOB_HEAP_MB, DEFAULT_JOB_TIME_LIMIT_MS, JobThreads } from './jobThreads.js';

interface ElectronParentPort {
  on(event: 'message', listener: (e: { data: unknown }) => void): void;
  postMessage(message: unknown): void;
}

const parentPort = (process as unknown as { parentPort?: ElectronParentPort }).parentPort;

function argValue(name: string, fallback: number): number {
  const i = process.argv.indexOf(name);
  const v = i >= 0 ? Number(process.argv[i + 1]) : NaN;
  return Number.isFinite(v) && v > 0 ? v : fallback;
}
const JOB_TIME_LIMIT_MS = argValue('--job-time-limit-ms', DEFAULT_JOB_TIME_LIMIT_MS);
const JOB_HEAP_MB = argValue('--job-heap-mb', DEFAULT_JOB_HEAP_MB);

function send(message: FromWorker): void {
  try {
    if (parentPort) parentPort.postMessage(message);
    else if (process.send && process.connected) process.send(message);
  } catch (e) {
    process.stderr.write(`engine worker: could not send a message: ${(e as Error).message}\n`);
  }
}

const jobs = new JobThreads({ heapMb: JOB_HEAP_MB, timeLimitMs: JOB_TIME_LIMIT_MS, maxIdle: 1 });

function startJob(jobId: string, job: JobRequest): void {
  if (job.kind === 'probe' && job.mode === 'hang') {
    // Blocks this thread for good: no heartbeat, no answer (tests of hang detection).
    for (;;) {
      /* hang */
    }
  }
  jobs.start(jobId, job, { progress: send, result: send });
}

function onRequest(raw: unknown): void {
  const why = guardPlainData(raw, WORKER_LIMITS);
  const parsed = why === undefined ? ToWorkerSchema.safeParse(raw) : undefined;
  if (!parsed?.success) {
    const jobId = typeof raw === 'object' && raw !== null && typeof (raw as { jobId?: unknown }).jobId === 'string' ? ((raw as { jobId: string }).jobId.slice(0, 100) || 'unknown') : 'unknown';
    const reason = why ?? parsed?.error.issues.slice(0, 3).map((i) => `${i.path.join('.') || '(message)'}: ${i.message}`).join('; ') ?? 'malformed';
    process.stderr.write(`engine worker: refused a request: ${reason}\n`);
    return send({ type: 'result', jobId, ok: false, error: { kind: 'usage', message: `the worker refused a malformed request: ${reason}`, problems: [reason] } });
  }
  const m = parsed.data;
  if (m.type === 'cancel') return jobs.cancel(m.jobId);
  startJob(m.jobId, m.job);
}

function safe(fn: (raw: unknown) => void): (raw: unknown) => void {
  return (raw) => {
    try {
      fn(raw);
    } catch (e) {
      process.stderr.write(`engine worker: ${(e as Error).stack ?? String(e)}\n`);
    }
  };
}

process.on('uncaughtException', (e) => process.stderr.write(`engine worker: uncaught ${(e as Error).stack ?? String(e)}\n`));
process.on('unhandledRejection', (e) => process.stderr.write(`engine worker: unhandled rejection ${String(e)}\n`));

// Die with the parent: the IPC channel closes (Node), or the parent's pid goes away (both hosts).
const parentPid = process.ppid;
process.on('disconnect', () => process.exit(0));
const heartbeat = setInterval(() => {
  if (process.ppid !== parentPid) process.exit(0);
  send({ type: 'heartbeat', at: Date.now() });
}, HEARTBEAT_INTERVAL_MS);
heartbeat.unref?.();
// The heartbeat is unref'd; the IPC channel (or parentPort) keeps the process alive.

if (parentPort) parentPort.on('message', (e) => safe(onRequest)(e.data));
else process.on('message', safe(onRequest));
send({ type: 'ready', pid: process.pid, engineVersion: ENGINE_VERSION });
// One thread loads the engine ahead of the first job.
try {
  jobs.ahead(1);
} catch (e) {
  process.stderr.write(`engine worker: could not start a job thread ahead: ${(e as Error).message}\n`);
}
