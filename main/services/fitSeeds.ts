/**
 * A fit from several seeds (the default): the same model and data are fitted from each seed,
 * each fit with its post-fit steps; the seeds' agreement is judged (engine/posthoc/seedAgreement)
 * and the fit with the lowest importance-sampling -2LL is kept, labelled as such in its record
 * (`seeds`) and summary; disagreement becomes a warning, which dose advice flags.
 *
 * The seam for worker processes: `runOne(seed, signal, onProgress)` runs one complete fit
 * (estimation and post-fit) and resolves with its record, a plain JSON-serialisable object. The
 * default runs in this process (`runSeedInProcess`); a host with worker processes passes a runOne
 * that sends {dataset, spec, seed, settings} to a worker, relays its progress messages to
 * onProgress, kills the worker when the signal aborts and resolves with the record it returns.
 * `concurrency` bounds how many runOne calls are in flight at once (in-process runs gain nothing
 * from more than 1, as they share one thread). With `slots` (the shared core scheduler,
 * main/services/coreSlots.ts) the fit takes its cores from the scheduler (one in its turn, then
 * those free) and splits them over its seeds, as threads when the cores outnumber the seeds, so
 * every fit and the queue's jobs share the machine's cores. The worker runner is
 * `runSeedInWorker` (main/services/fitRunner.ts), the thread runner `runSeedInThreads`
 * (main/services/seedThreads.ts). When one seed fails, the others are cancelled.
 *
 * Diagnostics for the kept seed only: the choice needs each seed's estimates, -2LL, Monte Carlo
 * error and degeneracy, and the kept seed's SEs, not the diagnostics (NPDE and VPC simulations,
 * about half of a small fit's post-fit time). When the seeds outnumber the cores they run on (so
 * a seed's diagnostics would delay the others), and the caller gives `addDiagnostics`, each seed
 * runs its post-fit steps without them and the kept seed alone gets them afterwards
 * (addDeferredDiagnostics, main/services/fitPosthoc.ts): the kept record is the one a seed with
 * its diagnostics gives, field for field (tests/integration/fit/keptDiagnostics.test.ts); the
 * seeds not kept carry no diagnostics' warnings in `seeds.runs`. With a core per seed nothing is
 * deferred: the diagnostics then cost no time, and deferring would add them at the end.
 */
import type { Dataset } from '../../engine/data/types.js';
import { seedAgreement, type SeedAgreement, type SeedFitSummary } from '../../engine/posthoc/seedAgreement.js';
import type { AbortSignalLike, SaemProgress } from '../../engine/saem/saem.js';
import type { SaemSettings } from '../../engine/saem/settings.js';
import { parseSaemSettings, resolveChains } from '../../engine/saem/settings.js';
import { fitGainsFromThreads } from '../worker/saemThreads.js';
import type { ModelSpec } from '../../engine/spec/modelSpec.js';
import type { ProgressMessage } from '../protocol/worker.js';
import type { CoreSlots, ReleaseSlot } from './coreSlots.js';
import type { FitPosthocOptions, PosthocFitRecord } from './fitPosthoc.js';
import { SEEDS_MAX, SEEDS_MIN } from './seedBounds.js';

export { SEEDS_MAX, SEEDS_MIN } from './seedBounds.js';

/**
 * Progress of one seed, in the form the worker sends (main/protocol/worker.ts ProgressMessage
 * without its job id): phase, iteration, planned iterations, current estimates by name.
 */
export interface SeedProgress {
  phase: ProgressMessage['phase'];
  iteration: number;
  maxIterations: number;
  estimates: Record<string, number>;
  message?: string;
}

/**
 * One seed's complete fit; `threads` = the cores the scheduler gave it (default 1);
 * `deferDiagnostics`: leave the post-fit diagnostics for `addDiagnostics` (FitSeedsOptions).
 */
export type RunOneSeed = (seed: number, signal: AbortSignal, onProgress: (p: SeedProgress) => void | Promise<void>, threads?: number, deferDiagnostics?: boolean) => Promise<PosthocFitRecord>;

/** The diagnostics a seed's run left for later, added to its record (the kept seed). */
export type AddSeedDiagnostics = (record: PosthocFitRecord, signal: AbortSignal, onProgress: (p: SeedProgress) => void | Promise<void>) => Promise<PosthocFitRecord>;

/** An estimator progress report in the worker's form (finite estimates by name). */
export function seedProgress(p: SaemProgress): SeedProgress {
  const estimates = Object.create(null) as Record<string, number>;
  p.estimateNames.forEach((n, i) => {
    if (Number.isFinite(p.estimates[i])) estimates[n] = p.estimates[i];
  });
  return { phase: p.phase, iteration: p.iteration, maxIterations: p.plannedIterations, estimates };
}

export interface FitSeedsOptions {
  /** The seeds to run (default: the spec's seed and the next ones, `seeds` of them in all). */
  seeds?: readonly number[];
  /** One complete fit from one seed (default: in this process). */
  runOne?: RunOneSeed;
  /** The kept seed's diagnostics when the seeds' runs left them for later (default with the in-process runOne: in this process; without it nothing is deferred). */
  addDiagnostics?: AddSeedDiagnostics;
  /** How many runs at once (default 1; with `slots`, all seeds, bounded by the free slots). */
  concurrency?: number;
  /** The shared core scheduler: each run holds one slot while it computes. */
  slots?: CoreSlots;
  signal?: AbortSignalLike;
  /** Progress of each seed (estimation, then its post-fit steps). */
  onProgress?: (seed: number, p: SeedProgress) => void | Promise<void>;
  /** Setting overrides for every seed (in-process runner). */
  settings?: Partial<SaemSettings>;
  /** Post-fit options for every seed (in-process runner). */
  posthoc?: FitPosthocOptions['posthoc'];
  onStatus?: (message: string) => void | Promise<void>;
}

export interface SeedRunRecord {
  seed: number;
  minus2LL: number | null;
  mcError: number | null;
  usableAsPrior: boolean;
  /** Population estimates in the order of the kept record's `population`. */
  estimates: (number | null)[];
  warnings: string[];
}

export type SeedsSection = SeedAgreement & { runs: SeedRunRecord[] };
export type MultiSeedFitRecord = PosthocFitRecord & { seeds: SeedsSection };

/** The seeds of a fit: base, base + 1, ... (`count` of them). */
export function seedList(base: number, count: number): number[] {
  if (!(Number.isInteger(count) && count >= SEEDS_MIN && count <= SEEDS_MAX)) throw new RangeError(`the number of seeds must be an integer in [${SEEDS_MIN}, ${SEEDS_MAX}], got ${count}`);
  return Array.from({ length: count }, (_, k) => base + k);
}

/** The default runOne: estimation and post-fit steps in this process. */
export function runSeedInProcess(dataset: Dataset, spec: ModelSpec, options: Pick<FitSeedsOptions, 'settings' | 'posthoc'> = {}): RunOneSeed {
  return async (seed, signal, onProgress, threads = 1, deferDiagnostics = false) => {
    const [{ fitDataset }, { addPosthoc }] = await Promise.all([import('./fitService.js'), import('./fitPosthoc.js')]);
    const outcome = await fitDataset(dataset, spec, { seed, threads, onProgress: (p) => onProgress(seedProgress(p)), signal, ...(options.settings ? { settings: options.settings } : {}) });
    return addPosthoc(outcome, { ...(options.posthoc ? { posthoc: options.posthoc } : {}), ...(deferDiagnostics ? { deferDiagnostics } : {}) });
  };
}

/** The default addDiagnostics, with runSeedInProcess: in this process, with the same post-fit options. */
export function addDiagnosticsInProcess(dataset: Dataset, spec: ModelSpec, options: Pick<FitSeedsOptions, 'posthoc'> = {}): AddSeedDiagnostics {
  return async (record) => {
    const [{ compileModel }, { addDeferredDiagnostics }] = await Promise.all([import('../../engine/stats/model.js'), import('./fitPosthoc.js')]);
    return addDeferredDiagnostics({ record, model: compileModel(spec, dataset) }, options.posthoc ? { posthoc: options.posthoc } : {});
  };
}

/**
 * Seeds run at once on `cores` cores: all of them when they fit; else all at once (up to two per
 * core) only when that shortens the run (3 seeds on 2 cores take 1.5 seeds' time, not 2), and a
 * core's worth at a time when the seeds fill the cores evenly (a worker can then be reused).
 */
export function seedsAtOnce(seeds: number, cores: number): number {
  return cores >= seeds ? seeds : seeds % cores === 0 ? cores : Math.min(seeds, 2 * cores);
}

function cancelledError(): Error {
  const e = new Error('the fit was cancelled');
  e.name = 'AbortError';
  return e;
}

const label = (e: PosthocFitRecord['population'][number]): string =>
  e.kind === 'typical' ? e.parameter : e.kind === 'bsv' ? `BSV ${e.parameter}` : e.kind === 'covariate' ? `${e.parameter}~${e.covariate}` : e.kind === 'correlation' ? `correlation ${e.parameter}` : `residual ${e.parameter}`;

export async function fitSeeds(dataset: Dataset, spec: ModelSpec, options: FitSeedsOptions = {}): Promise<MultiSeedFitRecord> {
  const settings = parseSaemSettings(spec.estimation, options.settings ?? {});
  const seeds = options.seeds ? [...options.seeds] : seedList(settings.seed, settings.seeds);
  if (seeds.length < SEEDS_MIN || seeds.length > SEEDS_MAX) throw new RangeError(`a fit runs ${SEEDS_MIN} to ${SEEDS_MAX} seeds, got ${seeds.length}`);
  const runOne = options.runOne ?? runSeedInProcess(dataset, spec, options);
  const addDiagnostics = options.addDiagnostics ?? (options.runOne ? undefined : addDiagnosticsInProcess(dataset, spec, options));
  // One controller for the runs: the caller's cancel, or the first failure, stops them all.
  const stop = new AbortController();
  const outer = options.signal;
  const onOuterAbort = () => stop.abort();
  if (outer && typeof (outer as AbortSignal).addEventListener === 'function') (outer as AbortSignal).addEventListener('abort', onOuterAbort, { once: true });
  const records: PosthocFitRecord[] = new Array(seeds.length);
  let failure: { error: unknown } | undefined;
  let next = 0;

  // The fit's cores (with the scheduler): one slot in its turn, then the slots free now, up to
  // one per seed, or more when the fit is large enough for estimator threads. When the seeds do
  // not fill the cores evenly, up to two per core run at once, so no core idles while the last
  // seeds finish (3 seeds on 2 cores take 1.5 seeds' time, not 2); with more cores than seeds each
  // seed gets threads. Slots are given back as soon as the unfinished seeds need fewer.
  const held: ReleaseSlot[] = [];
  const slots = options.slots;
  const threadsOf = new Array<number>(seeds.length).fill(1);
  let concurrency = Math.max(1, Math.min(seeds.length, options.concurrency ?? 1));
  try {
    if (slots) {
      held.push(await slots.acquire(stop.signal));
      const levels = dataset.subjects.reduce((n, s) => n + s.observations.length, 0);
      const wantsThreads = fitGainsFromThreads(levels, resolveChains(settings, dataset.subjects.length));
      const most = wantsThreads ? Infinity : seeds.length;
      for (let r = held.length < most ? slots.tryAcquire() : null; r; r = held.length < most ? slots.tryAcquire() : null) held.push(r);
      const cores = held.length;
      concurrency = seedsAtOnce(seeds.length, cores);
      if (seeds.length < cores) for (let k = 0; k < seeds.length; k++) threadsOf[k] = Math.floor(cores / seeds.length) + (k < cores % seeds.length ? 1 : 0);
    }
  } catch (error) {
    for (const r of held.splice(0)) r();
    if (outer && typeof (outer as AbortSignal).removeEventListener === 'function') (outer as AbortSignal).removeEventListener('abort', onOuterAbort);
    if (stop.signal.aborted) throw cancelledError();
    throw error;
  }
  // The seeds outnumber the cores they run on (in-process runs: one at a time): each seed's
  // diagnostics would delay the others, so only the kept seed gets them, afterwards.
  const defer = addDiagnostics !== undefined && seeds.length > 1 && seeds.length > (slots ? held.length : concurrency);
  const finished = new Uint8Array(seeds.length);
  const giveBackSpare = () => {
    let needed = 0;
    for (let k = 0; k < seeds.length; k++) if (!finished[k]) needed += threadsOf[k];
    while (held.length > Math.max(1, needed)) held.pop()!();
  };
  const runK = async (k: number) => {
    await options.onStatus?.(`seed ${seeds[k]} (${k + 1} of ${seeds.length})`);
    records[k] = await runOne(seeds[k], stop.signal, (p) => options.onProgress?.(seeds[k], p), threadsOf[k], defer);
  };
  const worker = async () => {
    while (next < seeds.length && !failure) {
      const k = next++;
      if (outer?.aborted) stop.abort();
      if (stop.signal.aborted) return;
      try {
        await runK(k);
      } catch (error) {
        if (!failure && !stop.signal.aborted) failure = { error };
        stop.abort();
      } finally {
        finished[k] = 1;
        if (slots) giveBackSpare();
      }
    }
  };
  try {
    await Promise.all(Array.from({ length: concurrency }, worker));
  } finally {
    for (const r of held.splice(0)) r();
    if (outer && typeof (outer as AbortSignal).removeEventListener === 'function') (outer as AbortSignal).removeEventListener('abort', onOuterAbort);
  }
  if (failure && !outer?.aborted) throw failure.error;
  if (outer?.aborted || records.some((r) => r === undefined)) throw cancelledError();
  /** The kept seed's diagnostics, on one core of the scheduler, cancellable as the seeds were. */
  const keptDiagnostics = async (record: PosthocFitRecord): Promise<PosthocFitRecord> => {
    const again = new AbortController();
    const onAbort = () => again.abort();
    if (outer && typeof (outer as AbortSignal).addEventListener === 'function') (outer as AbortSignal).addEventListener('abort', onAbort, { once: true });
    let release: ReleaseSlot | undefined;
    try {
      if (slots) release = await slots.acquire(again.signal);
      await options.onStatus?.(`diagnostics of the kept seed ${record.seed}`);
      return await addDiagnostics!(record, again.signal, (p) => options.onProgress?.(record.seed, p));
    } catch (error) {
      if (outer?.aborted) throw cancelledError();
      throw error;
    } finally {
      release?.();
      if (outer && typeof (outer as AbortSignal).removeEventListener === 'function') (outer as AbortSignal).removeEventListener('abort', onAbort);
    }
  };
  const summaries: SeedFitSummary[] = records.map((r, k) => ({
    seed: seeds[k],
    estimates: r.population.map((e) => e.estimate),
    minus2LL: 'likelihood' in r && r.likelihood ? r.likelihood.minus2LL : null,
    mcError: 'likelihood' in r && r.likelihood ? r.likelihood.mcError : null,
    usableAsPrior: r.degeneracy?.usableAsPrior ?? true,
  }));
  const first = records[0];
  const labels = first.population.map(label);
  // SEs of the kept fit judge the spread.
  const provisional = seedAgreement(labels, summaries, first.population.map(() => null));
  const keptAt = seeds.indexOf(provisional.keptSeed);
  if (defer && records[keptAt].posthoc?.diagnosticsDeferred) records[keptAt] = await keptDiagnostics(records[keptAt]);
  const kept = records[keptAt];
  const agreement = seedAgreement(labels, summaries, kept.population.map((e) => e.se));
  const runs: SeedRunRecord[] = summaries.map((s, k) => ({
    seed: s.seed,
    minus2LL: s.minus2LL,
    mcError: s.mcError,
    usableAsPrior: s.usableAsPrior,
    estimates: s.estimates.map((x) => (Number.isFinite(x) ? x : null)),
    warnings: [...records[k].warnings],
  }));
  const out = { ...kept, seeds: { ...agreement, runs }, warnings: [...kept.warnings] } as MultiSeedFitRecord;
  if (!agreement.agree) out.warnings.push(`seeds: ${agreement.verdict}`);
  return out;
}

/** Lines for the top of the fit summary: which seed was kept and the verdict. */
export function formatSeeds(section: SeedsSection | undefined): string[] {
  if (!section || section.seeds.length <= 1) return [];
  const fmt = (x: number | null) => (x === null ? '-' : x.toFixed(2));
  const lines = [`Seeds ${section.seeds.join(', ')}: kept the fit from seed ${section.keptSeed} (${section.keptReason}); ${section.verdict}`];
  lines.push(`  -2LL by seed: ${section.runs.map((r) => `${r.seed}: ${fmt(r.minus2LL)}`).join(', ')}${section.minus2LL.range !== null ? ` (range ${section.minus2LL.range.toFixed(2)})` : ''}`);
  const worst = section.estimates.filter((e) => e.rangeInSe !== null).sort((x, y) => (y.rangeInSe ?? 0) - (x.rangeInSe ?? 0))[0];
  if (worst) lines.push(`  largest spread across seeds: ${worst.label}, ${worst.rangeInSe!.toFixed(2)} SE`);
  lines.push('');
  return lines;
}
