/**
 * Schemas of every request payload on the bridge (renderer -> main), docs/architecture.md
 * "Protocol". Written with zod 4 because it gives, from one declaration, both the runtime check
 * and the TypeScript type (z.infer), so the type the renderer compiles against cannot drift from
 * what main accepts; strict objects reject unknown keys (a misspelt option is an error, never
 * silently ignored), and its error paths name the offending field. Nested documents that the
 * engine already validates field by field (model spec, patient, target, mapping template) are
 * accepted here as plain JSON objects and checked by their engine parser, so there is one rule
 * for each, shared with the CLI.
 *
 * No Node imports: the renderer may import this module.
 */
import { z } from 'zod';

/** Ids we mint: short, URL- and file-name-safe. */
export const Id = z.string().regex(/^[A-Za-z0-9][A-Za-z0-9_-]{0,79}$/, 'an id of letters, digits, _ and - (at most 80)');
export const Name = z.string().trim().min(1, 'a name is required').max(200, 'at most 200 characters');
export const Seed = z.number().int().min(0).max(2 ** 31 - 1);
/** A JSON object of any shape (checked by its engine parser). */
export const JsonObject = z.record(z.string(), z.unknown());
const Empty = z.strictObject({}).optional();
/**
 * The renderer's name for one engine request (dose advice, reading a file), so that the
 * matching cancel channel can stop that job in its worker.
 */
export const RequestId = Id;

/** Base64 text of a file; 4/3 of the 50 MB import limit plus padding. */
export const Base64 = z
  .string()
  .max(Math.ceil((50 * 1024 * 1024 * 4) / 3) + 4, 'the file is above the 50 MB import limit')
  .regex(/^[A-Za-z0-9+/]*={0,2}$/, 'not base64 text');

export const ImportOptionsInput = z.strictObject({
  dayFirst: z.boolean().optional(),
  monthFirst: z.boolean().optional(),
  decimalComma: z.boolean().optional(),
  molarMassGPerMol: z.number().positive().max(1e6).optional(),
  lloqMgL: z.number().positive().max(1e6).optional(),
  defaultRoute: z.enum(['bolus', 'infusion', 'oral']).optional(),
  drug: z.string().max(100).optional(),
});

/** Estimator setting overrides; bounds keep one job from running for days. */
export const SaemSettingsInput = z.strictObject({
  seed: Seed.optional(),
  chains: z.union([z.literal('auto'), z.number().int().min(1).max(50)]).optional(),
  searchMinIterations: z.number().int().min(1).max(20_000).optional(),
  searchMaxIterations: z.number().int().min(1).max(20_000).optional(),
  autoEndSearch: z.boolean().optional(),
  averagingIterations: z.number().int().min(1).max(20_000).optional(),
  stepExponent: z.number().gt(0.5).max(1).optional(),
  independentSteps: z.number().int().min(0).max(100).optional(),
  randomWalkSteps: z.number().int().min(0).max(100).optional(),
  componentSweeps: z.number().int().min(0).max(100).optional(),
  adaptiveSteps: z.number().int().min(0).max(100).optional(),
  targetAcceptance: z.number().gt(0).lt(1).optional(),
  annealingTau: z.number().min(0).max(10).optional(),
  annealingIterations: z.union([z.null(), z.number().int().min(0).max(20_000)]).optional(),
  settleWindow: z.number().int().min(2).max(10_000).optional(),
  settleTolerance: z.number().gt(0).max(10).optional(),
  individualDraws: z.number().int().min(1).max(10_000).optional(),
  iterateAveraging: z.boolean().optional(),
  seeds: z.number().int().min(1).max(16).optional(),
});

/** What a fit job does after the estimator. */
export const PostFitInput = z.strictObject({
  /** Run the post-fit steps (SEs, -2LL, diagnostics); default true. */
  run: z.boolean().optional(),
});

export const DosingTargetInput = z.union([z.string().regex(/^[a-z0-9][a-z0-9-]{0,79}$/, 'a preset id'), JsonObject]);
export const DosingPriorInput = z.union([
  z.strictObject({ fitId: Id }),
  z.strictObject({ modelId: Id }),
  z.strictObject({ literatureModelId: z.string().regex(/^[A-Za-z0-9][A-Za-z0-9_-]{0,79}$/) }),
  z.strictObject({ spec: JsonObject }),
]);
export const DosingOptionsInput = z.strictObject({
  seed: Seed.optional(),
  evaluate: z.string().max(200).optional(),
  draws: z.number().int().min(100).max(20_000).optional(),
  loadingDose: z.boolean().optional(),
  micMgL: z.number().positive().max(1e4).optional(),
  belowMgL: z.number().positive().max(1e6).optional(),
  overrideBlocks: z.boolean().optional(),
  peakDelayH: z.number().min(0).max(1000).optional(),
  nextDoseH: z.number().min(0).max(1e6).optional(),
});

/** Request payload schema of every channel. */
export const REQUEST_SCHEMAS = {
  'app.info': Empty,
  'app.acknowledgeCaution': Empty,
  'project.summary': Empty,
  'import.parse': z.strictObject({ fileName: z.string().min(1).max(255), bytesBase64: Base64, options: ImportOptionsInput.optional(), templateId: Id.optional(), requestId: RequestId.optional() }),
  'import.remap': z.strictObject({ importId: Id, mapping: JsonObject, requestId: RequestId.optional() }),
  'import.cancel': z.strictObject({ requestId: RequestId }),
  'import.saveTemplate': z.strictObject({ importId: Id, name: Name }),
  'import.templates': Empty,
  'import.addToProject': z.strictObject({ importId: Id, name: Name }),
  'dataset.get': z.strictObject({ datasetId: Id }),
  'models.catalogue': Empty,
  'models.save': z.strictObject({ spec: JsonObject, name: Name }),
  'models.get': z.strictObject({ modelId: Id }),
  'queue.enqueue': z.strictObject({ datasetId: Id, modelId: Id, seeds: z.array(Seed).min(1).max(20).optional(), settings: SaemSettingsInput.optional(), postFit: PostFitInput.optional(), label: Name.optional() }),
  'queue.list': Empty,
  'queue.cancel': z.strictObject({ jobId: Id }),
  'queue.reorder': z.strictObject({ jobIds: z.array(Id).max(10_000) }),
  'queue.rerun': z.strictObject({ jobId: Id, seeds: z.array(Seed).min(1).max(20) }),
  'fits.get': z.strictObject({ fitId: Id }),
  'fits.exportXlsx': z.strictObject({ fitId: Id }),
  'dosing.targets': Empty,
  'dosing.literatureModels': Empty,
  'dosing.advise': z.strictObject({ prior: DosingPriorInput, patient: JsonObject, target: DosingTargetInput.optional(), options: DosingOptionsInput.optional(), requestId: RequestId.optional() }),
  'dosing.cancel': z.strictObject({ requestId: RequestId }),
  'dosing.saveSession': z.strictObject({ advice: JsonObject, reviewer: z.string().max(200).optional() }),
  'report.pdf': z.strictObject({ html: z.string().max(20 * 1024 * 1024) }),
  'verify.run': z.strictObject({ quick: z.boolean() }),
  'verify.cancel': Empty,
  'verify.list': Empty,
  'verify.get': z.strictObject({ runId: Id }),
} as const;

export type Channel = keyof typeof REQUEST_SCHEMAS;
export const CHANNELS = Object.freeze(Object.keys(REQUEST_SCHEMAS) as Channel[]);
export type RequestOf<C extends Channel> = z.infer<(typeof REQUEST_SCHEMAS)[C]>;

export function isChannel(x: unknown): x is Channel {
  return typeof x === 'string' && Object.prototype.hasOwnProperty.call(REQUEST_SCHEMAS, x);
}

/** The envelope of a request from the renderer. */
export const RequestEnvelope = z.strictObject({ id: z.string().min(1).max(100), channel: z.string().max(100), payload: z.unknown().optional() });

export const EVENT_NAMES = ['queue', 'progress', 'verify-progress'] as const;
export type EventName = (typeof EVENT_NAMES)[number];
export const SubscribeEnvelope = z.strictObject({ id: z.string().min(1).max(100), subscribe: z.enum(EVENT_NAMES) });
