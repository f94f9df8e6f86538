/**
 * A fit from files run in an engine worker process (docs/architecture.md, "Processes"): the
 * command line's path to the same worker the app uses, so the fit and its post-fit steps are
 * cancellable in every phase (the worker thread is terminated) and a crash cannot take the
 * command with it. The dataset and spec are read and checked here first, so errors in them
 * appear before any process starts.
 */
import type { ProgressMessage } from '../protocol/worker.js';
import type { Dataset } from '../../engine/data/types.js';
import { EngineWorker, runEngineJob, type EngineWorkerOptions } from './engineClient.js';
import type { PosthocFitRecord } from './fitPosthoc.js';
import type { RunOneSeed } from './fitSeeds.js';
import type { SaemSettings } from '../../engine/saem/settings.js';

export interface FitInWorkerOptions {
  dataPath: string;
  modelPath: string;
  mappingPath?: string;
  seed?: number;
  settings?: Partial<SaemSettings>;
  /** Run the post-fit steps (default true). */
  postFit?: boolean;
  signal?: AbortSignal;
  onProgress?: (p: ProgressMessage) => void;
  /** Compiled engine worker (cliServiceRoots().workerEntry from the CLI). */
  workerEntry: string;
}

/** The fit record (with its post-fit additions unless postFit is false), as fit.json holds it. */
export async function fitFilesInWorker(o: FitInWorkerOptions): Promise<Record<string, unknown>> {
  // Loaded here, not with this module: the seed runner below needs none of the dataset reader.
  const [{ readDataset }, { readJsonFile }, { parseModelSpec }] = await Promise.all([import('./fitService.js'), import('./files.js'), import('../../engine/spec/modelSpec.js')]);
  const dataset = await readDataset(o.dataPath, o.mappingPath);
  const specJson = (await readJsonFile(o.modelPath)) as Record<string, unknown>;
  parseModelSpec(specJson);
  const value = await runEngineJob(
    {
      kind: 'fit',
      dataset: JSON.parse(JSON.stringify(dataset)) as never,
      spec: specJson,
      ...(o.seed !== undefined ? { seed: o.seed } : {}),
      ...(o.settings ? { settings: o.settings as never } : {}),
      postFit: o.postFit !== false,
    },
    { modulePath: o.workerEntry },
    { ...(o.signal ? { signal: o.signal } : {}), ...(o.onProgress ? { onProgress: o.onProgress } : {}) },
  );
  return value as Record<string, unknown>;
}

export interface SeedWorkerOptions {
  /** The model spec as JSON (the worker parses it again). */
  specJson: Record<string, unknown>;
  settings?: Partial<SaemSettings>;
  /** Run the post-fit steps (default true; without them the record has no -2LL to choose by). */
  postFit?: boolean;
  /** Where the worker comes from (default: a fresh process per seed, ended afterwards). */
  worker: EngineWorkerOptions;
  takeWorker?: () => EngineWorker;
  /** Given back a worker that finished its job cleanly (default: it is ended). */
  giveBack?: (w: EngineWorker) => void;
  /** Job ids (so progress can be matched to a queue job); default random. */
  jobId?: (seed: number) => string;
  /** Each seed's worker wall time (benchmarks). */
  onTiming?: (seed: number, t: { cpuMs: number; wallMs: number }) => void;
}

/**
 * fitSeeds' runOne in engine worker processes: one fit job (estimation and post-fit steps) per
 * seed, in its own worker, so seeds run in parallel on separate cores and the command line
 * shares the app's path. Cancelling ends the seed's job (its thread is terminated).
 */
export function runSeedInWorker(dataset: Dataset, o: SeedWorkerOptions): RunOneSeed {
  const wire = JSON.parse(JSON.stringify(dataset)) as never;
  return async (seed, signal, onProgress, threads = 1) => {
    const w = o.takeWorker ? o.takeWorker() : EngineWorker.spawn(o.worker);
    let clean = false;
    try {
      const value = await w.run(
        {
          kind: 'fit',
          dataset: wire,
          spec: o.specJson,
          seed,
          ...(threads > 1 ? { threads } : {}),
          ...(o.settings ? { settings: o.settings as never } : {}),
          postFit: o.postFit !== false,
        },
        {
          signal,
          ...(o.jobId ? { jobId: o.jobId(seed) } : {}),
          ...(o.onTiming ? { onTiming: (t: { cpuMs: number; wallMs: number }) => o.onTiming!(seed, t) } : {}),
          onProgress: (p: ProgressMessage) => {
            const { jobId: _jobId, ...rest } = p;
            void onProgress(rest);
          },
        },
      );
      clean = true;
      return value as PosthocFitRecord;
    } finally {
      if (clean && o.giveBack && w.alive && !w.busy) o.giveBack(w);
      else w.kill();
    }
  };
}

/**
 * The engine worker processes of one fit's seeds, reused (runSeedInWorker's takeWorker and
 * giveBack): a worker whose seed ended cleanly runs the next seed, with its job thread, loaded
 * modules and compiled code kept, so when there are fewer cores than seeds the later seeds start
 * no process. A worker whose seed failed or was cancelled is ended by the runner, never reused.
 * `close` ends them all.
 */
export class SeedWorkerPool {
  private readonly idle: EngineWorker[] = [];
  private readonly made = new Set<EngineWorker>();
  private closed = false;

  constructor(private readonly options: EngineWorkerOptions) {}

  readonly take = (): EngineWorker => {
    while (this.idle.length) {
      const w = this.idle.pop()!;
      if (w.alive) return w;
    }
    const w = EngineWorker.spawn(this.options);
    this.made.add(w);
    w.onExit(() => this.made.delete(w));
    return w;
  };

  readonly giveBack = (w: EngineWorker): void => {
    if (w.alive && !this.closed) this.idle.push(w);
    else w.kill();
  };

  close(): void {
    this.closed = true;
    this.idle.length = 0;
    for (const w of [...this.made]) w.kill();
  }
}
