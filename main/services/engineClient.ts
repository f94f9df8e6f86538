/**
 * Main's side of an engine worker process (docs/architecture.md, "Processes"): start it through
 * the one spawning interface, wait for `ready`, run jobs, relay progress, cancel, and turn every
 * way a process can fail (crash, signal, silence, a malformed answer, a time limit) into a
 * ServiceError of kind 'worker' naming the reason, with the last lines the worker wrote to stderr.
 */
import { randomUUID } from 'node:crypto';
import { guardPlainData, WORKER_LIMITS } from '../protocol/guard.js';
import { FromWorkerSchema, HEARTBEAT_TIMEOUT_MS, type JobRequest, type ProgressMessage, type ToWorker } from '../protocol/worker.js';
import { ServiceError } from './serviceError.js';
import { spawnNodeWorker, type SpawnWorker, type WorkerHandle } from './workerSpawner.js';

export interface EngineWorkerOptions {
  /** Compiled main/worker/engineWorker.js (given by the host: ServiceRoots.workerEntry). */
  modulePath: string;
  spawn?: SpawnWorker;
  /** V8 heap of a job's thread (MB). */
  jobHeapMb?: number;
  /** Wall-clock limit of one job. */
  jobTimeLimitMs?: number;
  heartbeatTimeoutMs?: number;
  readyTimeoutMs?: number;
  /** Time a cancelled job gets to answer before its process is killed. */
  cancelGraceMs?: number;
}

export interface RunJobOptions {
  onProgress?: (p: ProgressMessage) => void;
  /** CPU and wall time the job took inside the worker (benchmarks, logs). */
  onTiming?: (t: { cpuMs: number; wallMs: number }) => void;
  signal?: AbortSignal;
  jobId?: string;
}

interface Pending {
  onTiming?: (t: { cpuMs: number; wallMs: number }) => void;
  resolve: (v: unknown) => void;
  reject: (e: ServiceError) => void;
  onProgress?: (p: ProgressMessage) => void;
  cancelTimer?: NodeJS.Timeout;
}

/** The last few non-empty lines of a stderr tail, for error messages. */
function lastLines(text: string, n = 5): string[] {
  return text.split(/\r?\n/).map((l) => l.trim()).filter(Boolean).slice(-n).map((l) => l.slice(0, 300));
}

export class EngineWorker {
  private readonly handle: WorkerHandle;
  private readonly pending = new Map<string, Pending>();
  private readonly heartbeatTimeoutMs: number;
  private readonly cancelGraceMs: number;
  private lastHeard = Date.now();
  private watchdog: NodeJS.Timeout;
  private exitInfo: { code: number | null; signal: string | null } | undefined;
  private failure: ServiceError | undefined;
  private readonly exitListeners: ((why: ServiceError | undefined) => void)[] = [];
  readonly ready: Promise<void>;
  pid: number | undefined;

  private constructor(options: EngineWorkerOptions) {
    this.heartbeatTimeoutMs = options.heartbeatTimeoutMs ?? HEARTBEAT_TIMEOUT_MS;
    this.cancelGraceMs = options.cancelGraceMs ?? 500;
    const args: string[] = [];
    if (options.jobHeapMb) args.push('--job-heap-mb', String(options.jobHeapMb));
    if (options.jobTimeLimitMs) args.push('--job-time-limit-ms', String(options.jobTimeLimitMs));
    this.handle = (options.spawn ?? spawnNodeWorker)({ modulePath: options.modulePath, args });
    let readyResolve!: () => void;
    let readyReject!: (e: ServiceError) => void;
    this.ready = new Promise<void>((res, rej) => {
      readyResolve = res;
      readyReject = rej;
    });
    this.ready.catch(() => undefined);
    const readyTimer = setTimeout(() => this.die(new ServiceError('worker', `the engine worker did not start within ${((options.readyTimeoutMs ?? 20_000) / 1000).toFixed(0)} s`)), options.readyTimeoutMs ?? 20_000);
    this.exitListeners.push((why) => {
      clearTimeout(readyTimer);
      readyReject(why ?? new ServiceError('worker', 'the engine worker ended before it was ready'));
    });
    this.handle.onMessage((raw) => {
      this.lastHeard = Date.now();
      const why = guardPlainData(raw, WORKER_LIMITS);
      const parsed = why === undefined ? FromWorkerSchema.safeParse(raw) : undefined;
      if (!parsed?.success) {
        const reason = why ?? parsed?.error.issues.slice(0, 3).map((i) => `${i.path.join('.') || '(message)'}: ${i.message}`).join('; ');
        return this.die(new ServiceError('worker', `the engine worker sent a malformed message (${reason}) and was stopped`));
      }
      const m = parsed.data;
      if (m.type === 'ready') {
        this.pid = m.pid;
        clearTimeout(readyTimer);
        readyResolve();
      } else if (m.type === 'progress') {
        const p = this.pending.get(m.progress.jobId);
        try {
          p?.onProgress?.(m.progress);
        } catch {
          // A listener's fault must not stop the job.
        }
      } else if (m.type === 'result') {
        const p = this.pending.get(m.jobId);
        if (!p) return;
        this.pending.delete(m.jobId);
        clearTimeout(p.cancelTimer);
        if (m.ok) {
          if (m.timing) p.onTiming?.(m.timing);
          p.resolve(m.value);
        }
        else p.reject(new ServiceError(m.error.kind, m.error.message, m.error.problems));
      }
    });
    this.handle.onExit((code, signal) => {
      this.exitInfo = { code, signal };
      const tail = lastLines(this.handle.stderrTail());
      const oom = /heap out of memory|Allocation failed/i.test(this.handle.stderrTail());
      const how = signal ? `was ended by signal ${signal}` : `exited with code ${code}`;
      this.die(this.failure ?? new ServiceError('worker', `the engine worker process ${how}${oom ? ' (out of memory)' : ''}`, tail.map((l) => `worker stderr: ${l}`)));
    });
    this.watchdog = setInterval(() => {
      if (Date.now() - this.lastHeard > this.heartbeatTimeoutMs)
        this.die(new ServiceError('worker', `the engine worker stopped answering (no heartbeat for ${(this.heartbeatTimeoutMs / 1000).toFixed(0)} s) and was stopped`));
    }, Math.min(1000, Math.max(50, this.heartbeatTimeoutMs / 4)));
    this.watchdog.unref();
  }

  /** Start a worker process and wait until it says it is ready. */
  static async start(options: EngineWorkerOptions): Promise<EngineWorker> {
    const w = new EngineWorker(options);
    await w.ready;
    return w;
  }

  /** Start without waiting (the first run waits for ready). */
  static spawn(options: EngineWorkerOptions): EngineWorker {
    return new EngineWorker(options);
  }

  get alive(): boolean {
    return this.exitInfo === undefined && this.failure === undefined;
  }
  get busy(): boolean {
    return this.pending.size > 0;
  }

  onExit(listener: (why: ServiceError | undefined) => void): void {
    this.exitListeners.push(listener);
  }

  /** Run one job; resolves with its value or rejects with a ServiceError (kind 'cancelled' on abort). */
  async run(job: JobRequest, options: RunJobOptions = {}): Promise<unknown> {
    if (options.signal?.aborted) throw new ServiceError('cancelled', 'the job was cancelled');
    await this.ready;
    if (!this.alive) throw this.failure ?? new ServiceError('worker', 'the engine worker has ended');
    // A cancel while the process was starting must stop the job before it is sent.
    if (options.signal?.aborted) throw new ServiceError('cancelled', 'the job was cancelled');
    const jobId = options.jobId ?? randomUUID();
    return new Promise<unknown>((resolve, reject) => {
      const onAbort = () => this.cancel(jobId);
      const done = () => options.signal?.removeEventListener('abort', onAbort);
      this.pending.set(jobId, {
        resolve: (v) => (done(), resolve(v)),
        reject: (e) => (done(), reject(e)),
        ...(options.onProgress ? { onProgress: options.onProgress } : {}),
        ...(options.onTiming ? { onTiming: options.onTiming } : {}),
      });
      options.signal?.addEventListener('abort', onAbort, { once: true });
      this.post({ type: 'job', jobId, job });
    });
  }

  /** Ask the worker to stop a job; kills the process when it does not answer within the grace time. */
  cancel(jobId: string): void {
    const p = this.pending.get(jobId);
    if (!p || p.cancelTimer) return;
    this.post({ type: 'cancel', jobId });
    p.cancelTimer = setTimeout(() => {
      if (!this.pending.has(jobId)) return;
      this.pending.delete(jobId);
      p.reject(new ServiceError('cancelled', 'the job was cancelled (its worker did not answer and was stopped)'));
      this.kill();
    }, this.cancelGraceMs);
  }

  private post(m: ToWorker): void {
    try {
      this.handle.postMessage(m);
    } catch (e) {
      this.die(new ServiceError('worker', `cannot send to the engine worker: ${(e as Error).message}`));
    }
  }

  /** End the process; every pending job fails with `why`. */
  private die(why: ServiceError): void {
    if (!this.failure) this.failure = why;
    clearInterval(this.watchdog);
    this.handle.kill();
    for (const [id, p] of this.pending) {
      this.pending.delete(id);
      clearTimeout(p.cancelTimer);
      p.reject(p.cancelTimer ? new ServiceError('cancelled', 'the job was cancelled') : this.failure);
    }
    const listeners = this.exitListeners.splice(0);
    for (const l of listeners) l(this.failure);
  }

  /** Stop the worker now (jobs still running fail as cancelled). */
  kill(): void {
    this.die(this.failure ?? new ServiceError('cancelled', 'the engine worker was stopped'));
  }

  /** Last lines of the worker's stderr. */
  stderrLines(n = 5): string[] {
    return lastLines(this.handle.stderrTail(), n);
  }
}

/** Run one job in a fresh worker process and stop it afterwards (the CLI's path). */
export async function runEngineJob(job: JobRequest, worker: EngineWorkerOptions, options: RunJobOptions = {}): Promise<unknown> {
  const w = EngineWorker.spawn(worker);
  try {
    return await w.run(job, options);
  } finally {
    w.kill();
  }
}
