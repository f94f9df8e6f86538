/**
 * Engine jobs in heap-limited job threads of this process (docs/architecture.md, "Processes"):
 * the engine worker process runs its jobs here, and `plateau fit` runs its seeds here in its own
 * command process (docs/architecture.md, "Command line"). Each job runs in a worker thread
 * (jobThread.ts) with a V8 heap limit, so the calling thread stays free to relay progress, cancel a
 * job at once (even inside a synchronous post-fit step) by terminating its thread, and enforce
 * the job's time limit. A thread that ended its job cleanly is kept for the next one (its loaded
 * modules and compiled code too); a cancelled or failed job's thread is ended. Every outcome is one
 * result message; nothing thrown in a thread reaches the caller.
 */
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';
import { Worker } from 'node:worker_threads';
import type { FromWorker, JobRequest, ProgressMessage } from '../protocol/worker.js';
import type { ErrorValue } from '../services/serviceError.js';
import { debugDetail, ServiceError } from '../services/serviceError.js';

/** A job's heap (MB) and wall-clock limit unless the host sets others (engineWorker.ts's arguments). */
export const DEFAULT_JOB_HEAP_MB = 2048;
export const DEFAULT_JOB_TIME_LIMIT_MS = 6 * 3600_000;

export type JobResultMessage = Extract<FromWorker, { type: 'result' }>;
export type JobProgressMessage = Extract<FromWorker, { type: 'progress' }>;

/** Where a job's messages go. */
export interface JobListener {
  progress(message: JobProgressMessage): void;
  /** Called exactly once per job. */
  result(message: JobResultMessage): void;
}

export interface JobThreadsOptions {
  /** V8 heap of each job thread (MB). */
  heapMb: number;
  /** Wall-clock limit of one job. */
  timeLimitMs: number;
  /** Threads kept for the next job once their job ended cleanly (default 1). */
  maxIdle?: number;
  /** The compiled job thread module (default: jobThread.js beside this module, or in dist/ from the TypeScript source). */
  entry?: string;
}

export interface RunThreadJobOptions {
  jobId?: string;
  signal?: AbortSignal;
  onProgress?: (p: ProgressMessage) => void;
  /** CPU and wall time the job took in its thread. */
  onTiming?: (t: { cpuMs: number; wallMs: number }) => void;
}

/** The compiled entry beside this file; from the TypeScript source (tests), the one in dist/. */
function jobThreadEntry(): string {
  const here = fileURLToPath(import.meta.url);
  return here.endsWith('.ts') ? path.resolve(path.dirname(here), '../../dist/main/worker/jobThread.js') : path.join(path.dirname(here), 'jobThread.js');
}

interface JobThread {
  worker: Worker;
  jobId: string | undefined;
}

interface Running {
  thread: JobThread;
  timer: NodeJS.Timeout;
  listener: JobListener;
}

let jobCounter = 0;

export class JobThreads {
  private readonly running = new Map<string, Running>();
  private readonly idle: JobThread[] = [];
  private maxIdle: number;
  private readonly entry: string;
  private closed = false;
  /** Threads started so far (tests: a reused thread starts none). */
  started = 0;

  constructor(private readonly options: JobThreadsOptions) {
    this.maxIdle = options.maxIdle ?? 1;
    this.entry = options.entry ?? jobThreadEntry();
  }

  /** Start threads until `count` wait for a job, so their start and module loading overlap the caller's work. */
  ahead(count: number): void {
    while (!this.closed && this.idle.length < count) this.idle.push(this.makeThread());
  }

  /** How many threads that ended their job cleanly are kept for the next job. */
  setMaxIdle(count: number): void {
    this.maxIdle = count;
  }

  /** Jobs running now. */
  get busy(): number {
    return this.running.size;
  }

  /** Start a job; its progress and its one result go to `listener`. */
  start(jobId: string, job: JobRequest, listener: JobListener): void {
    if (this.running.has(jobId)) return listener.result({ type: 'result', jobId, ok: false, error: { kind: 'usage', message: `job ${jobId} is already running`, problems: [] } });
    if (this.closed) return listener.result({ type: 'result', jobId, ok: false, error: { kind: 'cancelled', message: 'the job was cancelled', problems: [] } });
    let thread: JobThread;
    try {
      thread = this.idle.pop() ?? this.makeThread();
    } catch (e) {
      return listener.result({ type: 'result', jobId, ok: false, error: { kind: 'worker', message: `could not start the job thread: ${(e as Error).message}`, problems: [] } });
    }
    thread.jobId = jobId;
    const timer = setTimeout(
      () => this.fail(jobId, { kind: 'worker', message: `the job ran longer than its time limit of ${(this.options.timeLimitMs / 60_000).toFixed(1)} min and was stopped`, problems: [] }),
      this.options.timeLimitMs,
    );
    this.running.set(jobId, { thread, timer, listener });
    thread.worker.postMessage({ jobId, job });
  }

  /** Stop a job at once (its thread is terminated); its result says cancelled. */
  cancel(jobId: string): void {
    this.fail(jobId, { kind: 'cancelled', message: 'the job was cancelled', problems: [] });
  }

  /** Run one job; resolves with its value or rejects with a ServiceError (kind 'cancelled' when the signal aborts). */
  run(job: JobRequest, options: RunThreadJobOptions = {}): Promise<unknown> {
    if (options.signal?.aborted) return Promise.reject(new ServiceError('cancelled', 'the job was cancelled'));
    const jobId = options.jobId ?? `job-${process.pid}-${++jobCounter}`;
    return new Promise<unknown>((resolve, reject) => {
      const onAbort = () => this.cancel(jobId);
      options.signal?.addEventListener('abort', onAbort, { once: true });
      this.start(jobId, job, {
        progress: (m) => {
          try {
            options.onProgress?.(m.progress);
          } catch {
            // A listener's fault must not stop the job.
          }
        },
        result: (m) => {
          options.signal?.removeEventListener('abort', onAbort);
          if (m.ok) {
            if (m.timing) options.onTiming?.(m.timing);
            resolve(m.value);
          } else reject(new ServiceError(m.error.kind, m.error.message, m.error.problems));
        },
      });
    });
  }

  /** End every thread; running jobs fail as cancelled. */
  close(): void {
    this.closed = true;
    for (const jobId of [...this.running.keys()]) this.cancel(jobId);
    for (const t of this.idle.splice(0)) void t.worker.terminate();
  }

  private makeThread(): JobThread {
    const t: JobThread = {
      worker: new Worker(this.entry, { resourceLimits: { maxOldGenerationSizeMb: this.options.heapMb }, stderr: false, stdout: false }),
      jobId: undefined,
    };
    this.started++;
    t.worker.on('message', (m: FromWorker) => {
      const jobId = t.jobId;
      if (jobId === undefined) return;
      const r = this.running.get(jobId);
      if (!r) return;
      if (m.type === 'progress' && m.progress.jobId === jobId) r.listener.progress(m);
      else if (m.type === 'result' && m.jobId === jobId) this.finish(jobId, m, true);
    });
    t.worker.on('error', (e: Error & { code?: string }) => {
      this.drop(t);
      if (t.jobId === undefined) return;
      const oom = e.code === 'ERR_WORKER_OUT_OF_MEMORY';
      this.fail(
        t.jobId,
        oom
          ? { kind: 'worker', message: `the job needed more than ${this.options.heapMb} MB of memory and was stopped`, problems: [] }
          : { kind: 'internal', message: `internal error: the job thread failed unexpectedly (not a problem in your files); run again with PLATEAU_DEBUG=1 to see it${debugDetail(e)}`, problems: [] },
      );
    });
    t.worker.on('exit', (code) => {
      this.drop(t);
      if (t.jobId !== undefined) this.fail(t.jobId, { kind: 'worker', message: `the job thread ended without an answer (exit code ${code})`, problems: [] });
    });
    return t;
  }

  private drop(t: JobThread): void {
    const i = this.idle.indexOf(t);
    if (i >= 0) this.idle.splice(i, 1);
  }

  /** Give the job's result; keep its thread for the next job when it ended cleanly, else end the thread. */
  private finish(jobId: string, message: JobResultMessage, reusable: boolean): void {
    const r = this.running.get(jobId);
    if (!r) return;
    clearTimeout(r.timer);
    this.running.delete(jobId);
    r.thread.jobId = undefined;
    if (reusable && !this.closed && this.idle.length < this.maxIdle) this.idle.push(r.thread);
    else void r.thread.worker.terminate();
    r.listener.result(message);
  }

  private fail(jobId: string, error: ErrorValue): void {
    this.finish(jobId, { type: 'result', jobId, ok: false, error }, false);
  }
}
