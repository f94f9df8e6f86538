/**
 * Messages between main and an engine worker process (docs/architecture.md, "Processes"). Both
 * sides check what they receive: the worker trusts no request, main trusts no answer (the
 * worker may just have parsed a hostile file, or be half-dead). Structured clone carries them,
 * so bytes travel as Uint8Array. No Node imports.
 */
import { z } from 'zod';
import { ErrorValueSchema } from './errors.js';
import { JsonObject, SaemSettingsInput, Seed } from './schemas.js';

const JobId = z.string().min(1).max(100);
const Bytes = z.instanceof(Uint8Array);

/** A dataset crossing the line: rebuilt and re-validated by createDataset on arrival. */
export const DatasetWire = z.strictObject({ subjects: z.array(JsonObject).max(1_000_000), covariateNames: z.array(z.string().max(200)).max(10_000) });

export const ParseJob = z.strictObject({
  kind: z.literal('parse'),
  fileName: z.string().min(1).max(4096),
  bytes: Bytes,
  mapping: z.unknown().optional(),
  options: JsonObject.optional(),
  maxRows: z.number().int().positive().optional(),
});
export const FitJob = z.strictObject({
  kind: z.literal('fit'),
  dataset: DatasetWire,
  spec: JsonObject,
  seed: Seed.optional(),
  settings: SaemSettingsInput.optional(),
  /** Threads for the estimator (the cores the scheduler gave the job; default 1). */
  threads: z.number().int().min(1).max(64).optional(),
  /** Run the post-fit steps after the estimator in the same job (default true). */
  postFit: z.boolean().optional(),
  /** Leave the post-fit diagnostics for a later diagnostics job (a seed of a multi-seed fit: only the kept seed gets them). */
  deferDiagnostics: z.boolean().optional(),
});
export const PostFitJob = z.strictObject({
  kind: z.literal('postFit'),
  dataset: DatasetWire,
  spec: JsonObject,
  /** The fit record from a fit job (engine/saem/fitRecord). */
  record: JsonObject,
  seed: Seed.optional(),
});
/** The diagnostics a fit job left for later (deferDiagnostics), added to its record: the kept seed of a multi-seed fit. */
export const DiagnosticsJob = z.strictObject({
  kind: z.literal('diagnostics'),
  dataset: DatasetWire,
  spec: JsonObject,
  /** The record the fit job returned. */
  record: JsonObject,
});
export const SimulateJob = z.strictObject({
  kind: z.literal('simulate'),
  dataset: DatasetWire,
  spec: JsonObject,
  variability: z.boolean().optional(),
  seed: Seed.optional(),
  gridTimesH: z.array(z.number().finite()).max(100_000).optional(),
});
export const AdviseJob = z.strictObject({
  kind: z.literal('advise'),
  /** A fit record or a model JSON (engine/dosing/population loadPopulationModel). */
  model: JsonObject,
  patient: JsonObject,
  target: JsonObject.optional(),
  caution: z.string().min(1).max(100_000),
  seed: Seed,
  evaluate: z.string().max(200).optional(),
  draws: z.number().int().min(100).max(20_000).optional(),
  loadingDose: z.boolean().optional(),
  micMgL: z.number().positive().max(1e4).optional(),
  belowMgL: z.number().positive().max(1e6).optional(),
  overrideBlocks: z.boolean().optional(),
  peakDelayH: z.number().min(0).max(1000).optional(),
  nextDoseH: z.number().min(0).max(1e6).optional(),
});
/** The installation verification (main/verify), with the folders the host gave. */
export const VerifyJob = z.strictObject({
  kind: z.literal('verify'),
  quick: z.boolean(),
  /** resources/validation of the installation (suite.json and the references). */
  validationDir: z.string().min(1).max(4096),
  /** The installed engine files whose hash the report carries (dist/engine). */
  engineDir: z.string().min(1).max(4096),
});
/** Sleeps (cancellably) or spins: a job for tests and benchmarks of the process machinery. */
export const ProbeJob = z.strictObject({ kind: z.literal('probe'), mode: z.enum(['echo', 'sleep', 'spin', 'crash', 'hang', 'alloc']), ms: z.number().min(0).max(600_000).optional(), value: z.unknown().optional() });

export const JobRequestSchema = z.discriminatedUnion('kind', [ParseJob, FitJob, PostFitJob, DiagnosticsJob, SimulateJob, AdviseJob, VerifyJob, ProbeJob]);
export type JobRequest = z.infer<typeof JobRequestSchema>;
export type JobKind = JobRequest['kind'];

export const ToWorkerSchema = z.discriminatedUnion('type', [
  z.strictObject({ type: z.literal('job'), jobId: JobId, job: JobRequestSchema }),
  z.strictObject({ type: z.literal('cancel'), jobId: JobId }),
]);
export type ToWorker = z.infer<typeof ToWorkerSchema>;

export const PROGRESS_PHASES = ['search', 'averaging', 'post-fit', 'parse', 'simulate', 'advise', 'verify'] as const;
export type ProgressPhase = (typeof PROGRESS_PHASES)[number];

export const ProgressSchema = z.strictObject({
  jobId: JobId,
  phase: z.enum(PROGRESS_PHASES),
  iteration: z.number().int().min(0),
  maxIterations: z.number().int().min(0),
  /** Current estimates by name (typical values natural scale, BSV as SD); non-finite ones omitted. */
  estimates: z.record(z.string().max(200), z.number()),
  message: z.string().max(2000).optional(),
  /** Verification only: the check that starts (status running) or ended. Never throttled away. */
  check: z
    .strictObject({
      id: z.string().max(200),
      title: z.string().max(2000),
      index: z.number().int().min(1),
      total: z.number().int().min(1),
      status: z.enum(['running', 'pass', 'fail', 'not-run']),
      durationMs: z.number().min(0).optional(),
    })
    .optional(),
  /** The seed this progress belongs to, in a multi-seed fit job (set by main, not the worker). */
  seed: z.number().int().min(0).optional(),
});
export type ProgressMessage = z.infer<typeof ProgressSchema>;

export const FromWorkerSchema = z.union([
  z.strictObject({ type: z.literal('ready'), pid: z.number().int(), engineVersion: z.string().max(100) }),
  z.strictObject({ type: z.literal('heartbeat'), at: z.number() }),
  z.strictObject({ type: z.literal('progress'), progress: ProgressSchema }),
  z.strictObject({ type: z.literal('result'), jobId: JobId, ok: z.literal(true), value: z.unknown(), timing: z.strictObject({ cpuMs: z.number(), wallMs: z.number() }).optional() }),
  z.strictObject({ type: z.literal('result'), jobId: JobId, ok: z.literal(false), error: ErrorValueSchema }),
]);
export type FromWorker = z.infer<typeof FromWorkerSchema>;

export { HEARTBEAT_INTERVAL_MS, HEARTBEAT_TIMEOUT_MS, PROGRESS_MIN_INTERVAL_MS } from './timing.js';
