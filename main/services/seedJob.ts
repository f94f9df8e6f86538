/**
 * The engine job of one seed of a fit (main/protocol/worker.ts FitJob), built the same way for
 * an engine worker process (fitRunner.ts runSeedInWorker) and for a job thread of this process
 * (seedThreads.ts runSeedInThreads), so both run the same job.
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
export function seedFitJob(wire: unknown, o: SeedJobOptions, seed: number, threads: number): Extract<JobRequest, { kind: 'fit' }> {
  return {
    kind: 'fit',
    dataset: wire as never,
    spec: o.specJson,
    seed,
    ...(threads > 1 ? { threads } : {}),
    ...(o.settings ? { settings: o.settings as never } : {}),
    postFit: o.postFit !== false,
  };
}
