/**
 * The engine worker process (docs/architecture.md, "Processes"): started by
 * main/services/workerSpawner.ts (child_process.fork under Node, Electron's utilityProcess in the
 * app). Speaks the messages of main/protocol/worker.ts over the IPC channel (process.send) or
 * Electron's process.parentPort. Jobs run in a worker thread (jobThread.ts) with a heap
 * limit, so this thread stays free to send heartbeats, relay throttled progress, cancel a job at
 * once (even inside a synchronous post-fit step) and enforce the job's time limit. A thread that
 * ended its job cleanly is kept for the next one; a cancelled or failed job's thread is ended. It checks every
 * request, never lets an exception cross the process line, and exits when its parent goes away.
 *
 * Arguments: --job-time-limit-ms N (default 6 h), --job-heap-mb N (default 2048).
 */
import { Worker } from 'node:worker_threads';
import { ENGINE_VERSION } from '../../engine/version.js';
import { guardPlainData, WORKER_LIMITS } from '../protocol/guard.js';
import { HEARTBEAT_INTERVAL_MS, ToWorkerSchema, type FromWorker, type JobRequest } from '../protocol/worker.js';
import { debugDetail, type ErrorValue } from '../services/serviceError.js';

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
const JOB_TIME_LIMIT_MS = argValue('--job-time-limit-ms', 6 * 3600_000);
const JOB_HEAP_MB = argValue('--job-heap-mb', 2048);

function send(message: FromWorker): void {
  try {
    if (parentPort) parentPort.postMessage(message);
    else if (process.send && process.connected) process.send(message);
  } catch (e) {
    process.stderr.write(`engine worker: could not send a message: ${(e as Error).message}\n`);
  }
}

/** A job thread; `jobId` while it runs a job. */
interface JobThread {
  worker: Worker;
  jobId: string | undefined;
}

interface Running {
  thread: JobThread;
  timer: NodeJS.Timeout;
}
const running = new Map<string, Running>();
/** Threads that finished a job cleanly (or were started ahead), kept for the next job. */
const idle: JobThread[] = [];
const MAX_IDLE_THREADS = 1;

function makeThread(): JobThread {
  const t: JobThread = {
    worker: new Worker(new URL('./jobThread.js', import.meta.url), { resourceLimits: { maxOldGenerationSizeMb: JOB_HEAP_MB }, stderr: false, stdout: false }),
    jobId: undefined,
  };
  t.worker.on('message', (m: FromWorker) => {
    const jobId = t.jobId;
    if (jobId === undefined) return;
    if (m.type === 'progress' && m.progress.jobId === jobId) send(m);
    else if (m.type === 'result' && m.jobId === jobId) finish(jobId, m, true);
  });
  t.worker.on('error', (e: Error & { code?: string }) => {
    drop(t);
    if (t.jobId === undefined) return;
    const oom = e.code === 'ERR_WORKER_OUT_OF_MEMORY';
    fail(t.jobId, oom ? { kind: 'worker', message: `the job needed more than ${JOB_HEAP_MB} MB of memory and was stopped`, problems: [] } : { kind: 'internal', message: `internal error: the job thread failed unexpectedly (not a problem in your files); run again with PLATEAU_DEBUG=1 to see it${debugDetail(e)}`, problems: [] });
  });
  t.worker.on('exit', (code) => {
    drop(t);
    if (t.jobId !== undefined) fail(t.jobId, { kind: 'worker', message: `the job thread ended without an answer (exit code ${code})`, problems: [] });
  });
  return t;
}

function drop(t: JobThread): void {
  const i = idle.indexOf(t);
  if (i >= 0) idle.splice(i, 1);
}

/** Send the job's last message; keep its thread for the next job when it ended cleanly, else end the thread. */
function finish(jobId: string, message: FromWorker, reusable: boolean): void {
  const r = running.get(jobId);
  if (!r) return;
  clearTimeout(r.timer);
  running.delete(jobId);
  r.thread.jobId = undefined;
  send(message);
  if (reusable && idle.length < MAX_IDLE_THREADS) idle.push(r.thread);
  else void r.thread.worker.terminate();
}

const fail = (jobId: string, error: ErrorValue) => finish(jobId, { type: 'result', jobId, ok: false, error }, false);

function startJob(jobId: string, job: JobRequest): void {
  if (running.has(jobId)) return send({ type: 'result', jobId, ok: false, error: { kind: 'usage', message: `job ${jobId} is already running in this worker`, problems: [] } });
  if (job.kind === 'probe' && job.mode === 'hang') {
    // Blocks this thread for good: no heartbeat, no answer (tests of hang detection).
    for (;;) {
      /* hang */
    }
  }
  let thread: JobThread;
  try {
    thread = idle.pop() ?? makeThread();
  } catch (e) {
    return send({ type: 'result', jobId, ok: false, error: { kind: 'worker', message: `could not start the job thread: ${(e as Error).message}`, problems: [] } });
  }
  thread.jobId = jobId;
  const timer = setTimeout(
    () => fail(jobId, { kind: 'worker', message: `the job ran longer than its time limit of ${(JOB_TIME_LIMIT_MS / 60_000).toFixed(1)} min and was stopped`, problems: [] }),
    JOB_TIME_LIMIT_MS,
  );
  running.set(jobId, { thread, timer });
  thread.worker.postMessage({ jobId, job });
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
  if (m.type === 'cancel') return fail(m.jobId, { kind: 'cancelled', message: 'the job was cancelled', problems: [] });
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
  idle.push(makeThread());
} catch (e) {
  process.stderr.write(`engine worker: could not start a job thread ahead: ${(e as Error).message}\n`);
}
