/**
 * The engine jobs of one seed of a fit (main/protocol/worker.ts FitJob, and DiagnosticsJob for
 * the kept seed), built the same way for an engine worker process (fitRunner.ts) and for a job
 * thread of this process (seedThreads.ts), so both run the same jobs.
 */
import type { SaemSettings } from '../../engine/saem/settings.js';
import type { JobRequest } from '../protocol/worker.js';

export interface SeedJobOptions {
  /** The model spec as JSON (the job parses it again). */
  specJson: Record<string, unknown>;
  settings?: Partial<SaemSettings>;
  /** Run the post-fit steps (default true; without them the record has no -2LL to choose by). */
  postFit?: boolean;
}

/** The fit job of `seed` on the dataset in its wire form (a JSON copy) with `threads` cores. */
export function seedFitJob(wire: unknown, o: SeedJobOptions, seed: number, threads: number, deferDiagnostics = false): Extract<JobRequest, { kind: 'fit' }> {
  return {
    kind: 'fit',
    dataset: wire as never,
    spec: o.specJson,
    seed,
    ...(threads > 1 ? { threads } : {}),
    ...(o.settings ? { settings: o.settings as never } : {}),
    postFit: o.postFit !== false,
    ...(deferDiagnostics && o.postFit !== false ? { deferDiagnostics } : {}),
  };
}

/** The job that adds the diagnostics a seed's fit job left for later (the kept seed). */
export function seedDiagnosticsJob(wire: unknown, o: SeedJobOptions, record: unknown): Extract<JobRequest, { kind: 'diagnostics' }> {
  return { kind: 'diagnostics', dataset: wire as never, spec: o.specJson, record: record as never };
}
