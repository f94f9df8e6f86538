/**
 * A fit from files run in an engine worker process (docs/architecture.md, "Processes"): the
 * command line's path to the same worker the app uses, so the fit and its post-fit steps are
 * cancellable in every phase (the worker thread is terminated) and a crash cannot take the
 * command with it. The dataset and spec are read and checked here first, so errors in them
 * appear before any process starts.
 */
import type { JobRequest, ProgressMessage } from '../protocol/worker.js';
import type { Dataset } from '../../engine/data/types.js';
import { EngineWorker, runEngineJob, type EngineWorkerOptions } from './engineClient.js';
import type { PosthocFitRecord } from './fitPosthoc.js';
import type { AddSeedDiagnostics, RunOneSeed } from './fitSeeds.js';
import type { SaemSettings } from '../../engine/saem/settings.js';
import { seedDiagnosticsJob, seedFitJob, type SeedJobOptions } from './seedJob.js';

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

export interface SeedWorkerOptions extends SeedJobOptions {
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
 * fitSeeds' runOne in engine worker processes (the app's fit queue): one fit job (estimation and
 * post-fit steps) per seed, in its own worker, so seeds run in parallel on separate cores and a
 * crash ends only its own job. Cancelling ends the seed's job (its thread is terminated).
 * `plateau fit` runs the same job in job threads of its own process (seedThreads.ts).
 */
export function runSeedInWorker(dataset: Dataset, o: SeedWorkerOptions): RunOneSeed {
  const wire = JSON.parse(JSON.stringify(dataset)) as never;
  return (seed, signal, onProgress, threads = 1, deferDiagnostics = false) => inWorker(o, seed, seedFitJob(wire, o, seed, threads, deferDiagnostics), signal, onProgress);
}

/** fitSeeds' addDiagnostics in an engine worker process: the kept seed's diagnostics, left for later by runSeedInWorker. */
export function addDiagnosticsInWorker(dataset: Dataset, o: SeedWorkerOptions): AddSeedDiagnostics {
  const wire = JSON.parse(JSON.stringify(dataset)) as never;
  return (record, signal, onProgress) => inWorker(o, record.seed, seedDiagnosticsJob(wire, o, record), signal, onProgress);
}

/** One job of a seed in a worker (taken, or started for it), given back when it ended cleanly. */
async function inWorker(o: SeedWorkerOptions, seed: number, job: JobRequest, signal: AbortSignal, onProgress: Parameters<RunOneSeed>[2]): Promise<PosthocFitRecord> {
  const w = o.takeWorker ? o.takeWorker() : EngineWorker.spawn(o.worker);
  let clean = false;
  try {
    const value = await w.run(job, {
      signal,
      ...(o.jobId ? { jobId: o.jobId(seed) } : {}),
      ...(o.onTiming ? { onTiming: (t: { cpuMs: number; wallMs: number }) => o.onTiming!(seed, t) } : {}),
      onProgress: (p: ProgressMessage) => {
        const { jobId: _jobId, ...rest } = p;
        void onProgress(rest);
      },
    });
    clean = true;
    return value as PosthocFitRecord;
  } finally {
    if (clean && o.giveBack && w.alive && !w.busy) o.giveBack(w);
    else w.kill();
  }
}
