/**
 * fitSeeds' runOne in job threads of this process (main/worker/jobThreads.ts): how `plateau fit`
 * runs its seeds (docs/architecture.md, "Command line"). Each seed's job (estimation and post-fit
 * steps, seedJob.ts) runs in its own heap-limited thread, so seeds run in parallel on separate
 * cores, a cancel terminates the seed's thread at once, and this thread stays free. It is the job
 * an engine worker process runs (runSeedInWorker) without the process: the same code in the same
 * kind of thread, so the record is the same number for number.
 */
import type { Dataset } from '../../engine/data/types.js';
import type { ProgressMessage } from '../protocol/worker.js';
import type { JobThreads } from '../worker/jobThreads.js';
import type { PosthocFitRecord } from './fitPosthoc.js';
import type { AddSeedDiagnostics, RunOneSeed, SeedProgress } from './fitSeeds.js';
import { seedDiagnosticsJob, seedFitJob, type SeedJobOptions } from './seedJob.js';

export interface SeedThreadOptions extends SeedJobOptions {
  /** The job threads the seeds run in (a thread whose seed ended cleanly runs the next one). */
  jobs: JobThreads;
  /** Each seed's job CPU and wall time (benchmarks). */
  onTiming?: (seed: number, t: { cpuMs: number; wallMs: number }) => void;
}

const relay = (onProgress: (p: SeedProgress) => void | Promise<void>) => (p: ProgressMessage) => {
  const { jobId: _jobId, ...rest } = p;
  void onProgress(rest);
};

/** A wire copy of the dataset, made once per dataset for both runners of a fit. */
const wires = new WeakMap<Dataset, unknown>();
const wireOf = (dataset: Dataset): unknown => {
  let w = wires.get(dataset);
  if (w === undefined) wires.set(dataset, (w = JSON.parse(JSON.stringify(dataset)) as unknown));
  return w;
};

export function runSeedInThreads(dataset: Dataset, o: SeedThreadOptions): RunOneSeed {
  const wire = wireOf(dataset);
  return async (seed, signal, onProgress, threads = 1, deferDiagnostics = false) => {
    const value = await o.jobs.run(seedFitJob(wire, o, seed, threads, deferDiagnostics), {
      signal,
      ...(o.onTiming ? { onTiming: (t: { cpuMs: number; wallMs: number }) => o.onTiming!(seed, t) } : {}),
      onProgress: relay(onProgress),
    });
    return value as PosthocFitRecord;
  };
}

/** fitSeeds' addDiagnostics in a job thread: the kept seed's diagnostics, left for later by runSeedInThreads. */
export function addDiagnosticsInThreads(dataset: Dataset, o: SeedThreadOptions): AddSeedDiagnostics {
  const wire = wireOf(dataset);
  return async (record, signal, onProgress) => (await o.jobs.run(seedDiagnosticsJob(wire, o, record), { signal, onProgress: relay(onProgress) })) as PosthocFitRecord;
}
