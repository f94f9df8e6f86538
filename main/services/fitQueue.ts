/**
 * The fit queue (docs/architecture.md, "Fit queue"): fit jobs (dataset + model + settings + seed)
 * run in engine worker processes, at most `concurrency` at once (default cores - 1, at least 1),
 * in the queue's order, which the user can change; jobs can be cancelled and re-run with other
 * seeds. A job fits all its seeds (fitSeeds, the same multi-seed path as `plateau fit`), one
 * worker process per seed, and saves the kept fit with the seeds' verdict. Cores are handed out
 * by one scheduler (CoreSlots, `concurrency` slots): every seed of every job holds a slot while
 * it computes, first come first served, so the job first in the queue gets the free cores first. The queue is saved in the project (queue.json) on every change of state, so a restart
 * shows it as it was and resumes it (a job that was running is queued again). A worker that
 * crashes or falls silent fails only its own job, with the reason; the others go on.
 */
import { z } from 'zod';
import { parseModelSpec } from '../../engine/spec/modelSpec.js';
import { parseSaemSettings } from '../../engine/saem/settings.js';
import type { ErrorValue, JobState, QueueJob, QueueSnapshot } from '../protocol/bridge.js';
import { ErrorValueSchema } from '../protocol/errors.js';
import { SaemSettingsInput } from '../protocol/schemas.js';
import type { ProgressMessage } from '../protocol/worker.js';
import { CoreSlots, machineCores } from './coreSlots.js';
import { EngineWorker, type EngineWorkerOptions } from './engineClient.js';
import { addDiagnosticsInWorker, runSeedInWorker, type SeedWorkerOptions } from './fitRunner.js';
import { fitSeeds, seedList, SEEDS_MAX } from './fitSeeds.js';
import { newId, type ProjectStore } from './projectStore.js';
import { ServiceError, toErrorValue } from './serviceError.js';

const JobRecordSchema = z.strictObject({
  id: z.string(),
  label: z.string(),
  datasetId: z.string(),
  modelId: z.string(),
  seed: z.number().int(),
  /** Every seed of the job (the first is `seed`); absent in queues saved before multi-seed jobs. */
  seeds: z.array(z.number().int()).min(1).max(SEEDS_MAX).optional(),
  settings: SaemSettingsInput.optional(),
  postFit: z.strictObject({ run: z.boolean().optional() }).optional(),
  state: z.enum(['queued', 'running', 'done', 'failed', 'cancelled']),
  createdAt: z.string(),
  startedAt: z.string().optional(),
  finishedAt: z.string().optional(),
  error: ErrorValueSchema.optional(),
  fitId: z.string().optional(),
  /** Times the job was queued again because the app stopped while it ran. */
  restarts: z.number().int().min(0).optional(),
});
type JobRecord = z.infer<typeof JobRecordSchema>;
const QueueFileSchema = z.strictObject({ format: z.literal('plateau-queue'), schemaVersion: z.literal(1), jobs: z.array(JobRecordSchema) });

export interface EnqueueRequest {
  datasetId: string;
  modelId: string;
  /** The seeds of the one job (default: the settings' or model's seed and seed count). */
  seeds?: number[];
  settings?: z.infer<typeof SaemSettingsInput>;
  postFit?: { run?: boolean };
  label?: string;
}

export interface FitQueueOptions {
  worker: EngineWorkerOptions;
  /** Jobs at once (default cores - 1, at least 1). */
  concurrency?: number;
  /** Start running queued jobs at once (default true). */
  autoStart?: boolean;
  /** The core scheduler (default: `concurrency` slots of its own). */
  slots?: CoreSlots;
}

export function defaultConcurrency(): number {
  return Math.max(1, machineCores() - 1);
}

interface Live {
  controller: AbortController;
  /** The workers of the job's seeds now computing. */
  workers: Set<EngineWorker>;
  progress?: ProgressMessage;
  startedMs: number;
}

type Listener<T> = (payload: T) => void;

export class FitQueue {
  readonly concurrency: number;
  readonly slots: CoreSlots;
  private jobs: JobRecord[] = [];
  private readonly live = new Map<string, Live>();
  /** Wall time each finished job spent in its worker (ms), for the overhead benchmark. */
  readonly workerWallMs = new Map<string, number>();
  private readonly idle: EngineWorker[] = [];
  private readonly queueListeners = new Set<Listener<QueueSnapshot>>();
  private readonly progressListeners = new Set<Listener<ProgressMessage>>();
  private readonly idleWaiters: (() => void)[] = [];
  private started = false;
  private closed = false;
  /** Notes for the host's log (e.g. jobs resumed after a restart). */
  readonly notes: string[] = [];

  private constructor(
    private readonly store: ProjectStore,
    private readonly options: FitQueueOptions,
  ) {
    this.concurrency = Math.max(1, Math.floor(options.concurrency ?? defaultConcurrency()));
    this.slots = options.slots ?? new CoreSlots(this.concurrency);
  }

  /** Load the queue saved in the project; jobs that were running are queued again. */
  static async open(store: ProjectStore, options: FitQueueOptions): Promise<FitQueue> {
    const q = new FitQueue(store, options);
    const raw = await store.readQueueFile();
    if (raw !== undefined) {
      const dropped = dropRepeatedFits(raw);
      if (dropped) q.notes.push(`${dropped} fit job(s) saved by an older Plateau asked for repeated fits, which are no longer run: each job's seeds are compared instead (the seeds' agreement in its fit)`);
      const r = QueueFileSchema.safeParse(raw);
      if (!r.success) throw new ServiceError('file', `${store.dir}/queue.json is damaged; it was left untouched (move it away to start with an empty queue)`, r.error.issues.slice(0, 10).map((i) => `${i.path.join('.')}: ${i.message}`));
      q.jobs = r.data.jobs;
      let resumed = 0;
      for (const j of q.jobs) {
        if (j.state !== 'running') continue;
        j.state = 'queued';
        j.restarts = (j.restarts ?? 0) + 1;
        delete j.startedAt;
        resumed++;
      }
      if (resumed) {
        q.notes.push(`${resumed} fit job(s) were running when Plateau stopped and are queued again`);
        await q.persist();
      }
    }
    if (options.autoStart !== false) q.start();
    return q;
  }

  start(): void {
    this.started = true;
    this.pump();
  }

  // --- events ------------------------------------------------------------------------------

  onQueue(listener: Listener<QueueSnapshot>): () => void {
    this.queueListeners.add(listener);
    return () => this.queueListeners.delete(listener);
  }
  onProgress(listener: Listener<ProgressMessage>): () => void {
    this.progressListeners.add(listener);
    return () => this.progressListeners.delete(listener);
  }
  private emitQueue(): void {
    const snap = this.snapshot();
    for (const l of this.queueListeners) {
      try {
        l(snap);
      } catch {
        // a listener's fault stays with the listener
      }
    }
  }

  // --- view --------------------------------------------------------------------------------

  snapshot(): QueueSnapshot {
    let position = 0;
    const jobs = this.jobs.map((j): QueueJob => {
      const live = this.live.get(j.id);
      const out: QueueJob = {
        id: j.id,
        label: j.label,
        datasetId: j.datasetId,
        modelId: j.modelId,
        seed: j.seed,
        seeds: j.seeds ?? [j.seed],
        state: j.state,
        position: j.state === 'queued' ? position++ : null,
        createdAt: j.createdAt,
      };
      if (j.startedAt) out.startedAt = j.startedAt;
      if (j.finishedAt) out.finishedAt = j.finishedAt;
      if (j.error) out.error = j.error;
      if (j.fitId) out.fitId = j.fitId;
      if (j.startedAt) {
        const end = j.finishedAt ? Date.parse(j.finishedAt) : Date.now();
        out.elapsedS = Math.max(0, (end - Date.parse(j.startedAt)) / 1000);
      }
      if (live?.progress) {
        out.progress = live.progress;
        const p = live.progress;
        if ((p.phase === 'search' || p.phase === 'averaging') && p.iteration > 0 && p.maxIterations >= p.iteration && out.elapsedS !== undefined)
          out.remainingS = (out.elapsedS * (p.maxIterations - p.iteration)) / p.iteration;
      }
      return out;
    });
    return { jobs, concurrency: this.concurrency };
  }

  /** Process id of the worker running a job (tests and diagnostics). */
  workerPid(jobId: string): number | undefined {
    for (const w of this.live.get(jobId)?.workers ?? []) if (w.pid !== undefined) return w.pid;
    return undefined;
  }

  // --- commands ----------------------------------------------------------------------------

  /** Queue one fit job that runs all the request's seeds; answers its id (in a list). */
  async enqueue(req: EnqueueRequest): Promise<string[]> {
    this.store.datasetEntry(req.datasetId);
    const model = this.store.project.models.find((m) => m.id === req.modelId);
    if (!model) throw new ServiceError('usage', `no model with id ${req.modelId} in this project`);
    const dataset = this.store.datasetEntry(req.datasetId);
    let seeds = req.seeds && req.seeds.length ? [...req.seeds] : undefined;
    if (!seeds) {
      const spec = parseModelSpec((await this.store.getModel(req.modelId)).specJson);
      const settings = parseSaemSettings(spec.estimation, (req.settings ?? {}) as never);
      seeds = seedList(settings.seed, settings.seeds);
    }
    if (seeds.length > SEEDS_MAX) throw new ServiceError('usage', `a fit job runs at most ${SEEDS_MAX} seeds, got ${seeds.length}; queue several jobs instead`);
    if (new Set(seeds).size !== seeds.length) throw new ServiceError('usage', `the seeds of a fit job must differ, got ${seeds.join(', ')}`);
    const id = newId('j');
    const seedText = seeds.length > 1 ? `seeds ${seeds.join(', ')}` : `seed ${seeds[0]}`;
    this.jobs.push({
      id,
      label: req.label ?? `${model.name} on ${dataset.name}, ${seedText}`,
      datasetId: req.datasetId,
      modelId: req.modelId,
      seed: seeds[0],
      seeds,
      ...(req.settings ? { settings: req.settings } : {}),
      ...(req.postFit ? { postFit: req.postFit } : {}),
      state: 'queued',
      createdAt: new Date().toISOString(),
    });
    await this.changed();
    return [id];
  }

  async cancel(jobId: string): Promise<void> {
    const j = this.need(jobId);
    if (j.state === 'queued') {
      this.finish(j, 'cancelled', { error: { kind: 'cancelled', message: 'cancelled before it started', problems: [] } });
      await this.changed();
    } else if (j.state === 'running') {
      this.live.get(jobId)?.controller.abort();
    }
  }

  /** Put the listed queued jobs first, in the order given; other queued jobs keep their order after them. */
  async reorder(jobIds: string[]): Promise<void> {
    for (const id of jobIds) {
      const j = this.need(id);
      if (j.state !== 'queued') throw new ServiceError('usage', `job ${id} is ${j.state}; only queued jobs can be reordered`);
    }
    const wanted = new Map(jobIds.map((id, i) => [id, i]));
    const queuedSlots = this.jobs.map((j, i) => (j.state === 'queued' ? i : -1)).filter((i) => i >= 0);
    const queued = queuedSlots.map((i) => this.jobs[i]);
    const listed = queued.filter((j) => wanted.has(j.id)).sort((a, b) => wanted.get(a.id)! - wanted.get(b.id)!);
    const rest = queued.filter((j) => !wanted.has(j.id));
    const order = [...listed, ...rest];
    queuedSlots.forEach((slot, k) => (this.jobs[slot] = order[k]));
    await this.changed();
  }

  /** Queue the job again as one new job with other seeds. */
  async rerun(jobId: string, seeds: number[]): Promise<string[]> {
    const j = this.need(jobId);
    const base = j.label.replace(/,? \(?seeds? [\d, ]+\)?$/, '');
    const seedText = seeds.length > 1 ? `seeds ${seeds.join(', ')}` : `seed ${seeds[0]}`;
    return this.enqueue({ datasetId: j.datasetId, modelId: j.modelId, seeds, ...(j.settings ? { settings: j.settings } : {}), ...(j.postFit ? { postFit: j.postFit } : {}), label: `${base}, ${seedText}` });
  }

  /** Resolves when no job is queued or running (tests, shutdown). */
  whenIdle(): Promise<void> {
    if (!this.jobs.some((j) => j.state === 'queued' || j.state === 'running') && this.live.size === 0) return Promise.resolve();
    return new Promise((resolve) => this.idleWaiters.push(resolve));
  }

  /**
   * Stop: kill every worker. Jobs that were running stay "running" in queue.json, so the next
   * open queues them again (as after a crash).
   */
  async close(): Promise<void> {
    this.closed = true;
    for (const live of this.live.values()) for (const w of live.workers) w.kill();
    for (const w of this.idle.splice(0)) w.kill();
  }

  // --- running -----------------------------------------------------------------------------

  private need(jobId: string): JobRecord {
    const j = this.jobs.find((x) => x.id === jobId);
    if (!j) throw new ServiceError('usage', `no fit job with id ${jobId}`);
    return j;
  }

  /** The last queue.json write started, and the next one while it waits for that to finish. */
  private queueWrite: Promise<void> = Promise.resolve();
  private queueWritePending: Promise<void> | undefined;

  /**
   * Save the queue. Changes made while a write is in flight share one next write, which reads
   * the jobs when it starts: every caller still resumes only once a file holding its change is
   * on disk, but a burst of changes costs two writes, not one each.
   */
  private persist(): Promise<void> {
    if (this.queueWritePending) return this.queueWritePending;
    const next = this.queueWrite
      .catch(() => undefined)
      .then(() => {
        this.queueWritePending = undefined;
        return this.store.writeQueueFile({ format: 'plateau-queue', schemaVersion: 1, jobs: this.jobs });
      });
    this.queueWritePending = next;
    this.queueWrite = next;
    return next;
  }

  private async changed(): Promise<void> {
    this.emitQueue();
    this.pump();
    await this.persist();
  }

  private finish(j: JobRecord, state: JobState, extra: { error?: ErrorValue; fitId?: string } = {}): void {
    j.state = state;
    j.finishedAt = new Date().toISOString();
    if (extra.error) j.error = extra.error;
    if (extra.fitId) j.fitId = extra.fitId;
  }

  private pump(): void {
    if (!this.started || this.closed) return;
    while (this.live.size < this.concurrency) {
      const next = this.jobs.find((j) => j.state === 'queued');
      if (!next) break;
      next.state = 'running';
      next.startedAt = new Date().toISOString();
      delete next.error;
      const live: Live = { controller: new AbortController(), workers: new Set(), startedMs: Date.now() };
      this.live.set(next.id, live);
      void this.run(next, live);
    }
    if (this.live.size === 0 && !this.jobs.some((j) => j.state === 'queued')) for (const w of this.idleWaiters.splice(0)) w();
  }

  private takeWorker(): EngineWorker {
    while (this.idle.length) {
      const w = this.idle.pop()!;
      if (w.alive) return w;
    }
    return EngineWorker.spawn(this.options.worker);
  }

  private async run(j: JobRecord, live: Live): Promise<void> {
    // Not saved here: a running job is queued again on the next open, as a queued one is.
    this.emitQueue();
    let outcome: { state: JobState; error?: ErrorValue; fitId?: string };
    try {
      const dataset = await this.store.getDataset(j.datasetId);
      const model = await this.store.getModel(j.modelId);
      const seeds = j.seeds ?? [j.seed];
      const settings = { ...(j.settings ?? {}), seeds: seeds.length } as never;
      const seedWorkers: SeedWorkerOptions = {
        specJson: model.specJson,
        ...(j.settings ? { settings: j.settings as never } : {}),
        postFit: j.postFit?.run !== false,
        worker: this.options.worker,
        jobId: (seed) => `${j.id}:seed-${seed}`,
        takeWorker: () => {
          const w = this.takeWorker();
          live.workers.add(w);
          return w;
        },
        giveBack: (w) => {
          live.workers.delete(w);
          if (w.alive && !this.closed && this.idle.length < this.concurrency) this.idle.push(w);
          else w.kill();
        },
        onTiming: (_seed, t) => this.workerWallMs.set(j.id, (this.workerWallMs.get(j.id) ?? 0) + t.wallMs),
      };
      const runOne = runSeedInWorker(dataset, seedWorkers);
      const addDiagnostics = addDiagnosticsInWorker(dataset, seedWorkers);
      // A worker not given back (failed or cancelled) was ended by the runner.
      const forget = () => {
        for (const w of live.workers) if (!w.alive) live.workers.delete(w);
      };
      const record = await fitSeeds(dataset, model.spec, {
        seeds,
        settings,
        runOne: async (...args) => {
          try {
            return await runOne(...args);
          } finally {
            forget();
          }
        },
        addDiagnostics: async (...args) => {
          try {
            return await addDiagnostics(...args);
          } finally {
            forget();
          }
        },
        slots: this.slots,
        signal: live.controller.signal,
        onProgress: (seed, p) => {
          const message: ProgressMessage = { jobId: j.id, seed, ...p };
          live.progress = message;
          for (const l of this.progressListeners) {
            try {
              l(message);
            } catch {
              // ignore listener faults
            }
          }
        },
      });
      const fitId = await this.store.saveFit({ name: j.label, datasetId: j.datasetId, modelId: j.modelId, seed: typeof record.seed === 'number' ? record.seed : j.seed }, record as unknown as Record<string, unknown>);
      outcome = { state: 'done', fitId };
    } catch (e) {
      const error = e instanceof Error && e.name === 'AbortError' ? toErrorValue(new ServiceError('cancelled', 'the fit job was cancelled')) : toErrorValue(e);
      outcome = error.kind === 'cancelled' && live.controller.signal.aborted ? { state: 'cancelled', error } : { state: 'failed', error };
    }
    for (const w of live.workers) w.kill();
    this.live.delete(j.id);
    if (this.closed) return;
    this.finish(j, outcome.state, outcome);
    await this.changed().catch(() => undefined);
  }
}

/**
 * Queues saved before multi-seed fits replaced repeated fits may hold `postFit.repeat`; it is
 * removed (and counted, so the user is told) rather than making the whole queue unreadable.
 */
function dropRepeatedFits(raw: unknown): number {
  const jobs = (raw as { jobs?: unknown } | null)?.jobs;
  if (!Array.isArray(jobs)) return 0;
  let n = 0;
  for (const j of jobs) {
    const post = (j as { postFit?: unknown } | null)?.postFit;
    if (post && typeof post === 'object' && Object.prototype.hasOwnProperty.call(post, 'repeat')) {
      delete (post as Record<string, unknown>).repeat;
      n++;
    }
  }
  return n;
}
