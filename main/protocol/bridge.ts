/**
 * The bridge API between the renderer and main (docs/architecture.md, "Protocol"): the value
 * each channel answers, the events, and `PlateauBridge`, the interface that Electron's preload
 * (`window.plateau`) and the web host's WebSocket client both implement. Types only plus one
 * constant table: no Node, DOM or Electron imports, so the renderer can import it.
 */
import type { Dataset } from '../../engine/data/types.js';
import type { Advice } from '../../engine/dosing/advise.js';
import type { TargetSpec } from '../../engine/dosing/targets.js';
import type { ImportReport } from '../../engine/import/build.js';
import type { MappingTemplate } from '../../engine/import/roles.js';
import type { SheetPreview } from '../../engine/import/workbook.js';
import type { WithPosthoc } from '../../engine/posthoc/index.js';
import type { FitRecord } from '../../engine/saem/fitRecord.js';
import type { ModelSpec } from '../../engine/spec/modelSpec.js';
import type { ERROR_KINDS } from './errors.js';
import type { Channel, EventName, RequestOf } from './schemas.js';
import type { VerificationReport } from '../verify/types.js';
import type { ProgressMessage } from './worker.js';

export type { VerificationReport, CheckResult, CheckRow, CheckStatus } from '../verify/types.js';

export type { Channel, EventName, RequestOf } from './schemas.js';

/** The one serialisable error value (same shape as main/services/serviceError.ts ErrorValue). */
export interface ErrorValue {
  kind: (typeof ERROR_KINDS)[number];
  message: string;
  problems: string[];
}

export type Result<T> = { ok: true; value: T } | { ok: false; error: ErrorValue };

/** On the wire (WebSocket): a request, its answer, and an event. */
export interface WireRequest<C extends Channel = Channel> {
  id: string;
  channel: C;
  payload?: RequestOf<C>;
}
export type WireResponse<T = unknown> = { id: string } & Result<T>;
export interface WireEvent<E extends EventName = EventName> {
  event: E;
  payload: EventPayload<E>;
}

export interface AppInfo {
  appVersion: string;
  engineVersion: string;
  host: 'electron' | 'web';
  caution: { title: string; text: string };
  cautionAcknowledged: boolean;
  cautionAcknowledgedAt: string | null;
  projectPath: string;
  /** Worker processes that run fits at once. */
  concurrency: number;
}

export interface DatasetSummary {
  id: string;
  name: string;
  subjects: number;
  doses: number;
  levels: number;
  censored: number;
  hash: string;
  addedAt: string;
}
export interface ModelSummary {
  id: string;
  name: string;
  structure: string;
  createdAt: string;
}
export interface FitSummary {
  id: string;
  name: string;
  datasetId: string;
  modelId: string;
  seed: number;
  createdAt: string;
  minus2LL: number | null;
  /** The seeds' agreement verdict of a multi-seed fit. */
  verdict?: string;
  warnings: number;
}
export interface DosingSessionSummary {
  id: string;
  patientId: string;
  status: string;
  createdAt: string;
}
export interface ProjectSummary {
  name: string;
  path: string;
  schemaVersion: number;
  datasets: DatasetSummary[];
  models: ModelSummary[];
  fits: FitSummary[];
  dosingSessions: DosingSessionSummary[];
}

/** One patient's events on their own time axis, for the import preview's timeline. */
export interface TimelineSubject {
  subject: string;
  doses: { timeH: number; amountMg: number }[];
  levels: { timeH: number; concMgL: number; censored: boolean }[];
}
export interface ImportPreview {
  importId: string;
  fileName: string;
  /**
   * Per sheet: header row (1-based), column profiles with up to five sample values each, and
   * the first 50 rows as the spreadsheet shows them (control characters escaped).
   */
  sheets: (SheetPreview & { previewRows: string[][] })[];
  /** The mapping in use (column roles per sheet, options): edit it and send import.remap. */
  mapping: MappingTemplate;
  /** True when the mapping is Plateau's suggestion (not a template or the user's). */
  suggested: boolean;
  skippedSheets: string[];
  report: ImportReport;
  timeline: TimelineSubject[];
  /** False while any row has an error: the dataset cannot be added. */
  canAdd: boolean;
}
export interface TemplateSummary {
  templateId: string;
  name: string;
  createdAt: string;
}

export interface CatalogueEntry {
  id: string;
  label: string;
  compartments: number;
  analytic: boolean;
  equation: string;
  parameterOrder: string[];
  parameters: { name: string; unit: string; description: string; defaultInitial: number; transforms: string[]; defaultWhenAbsent?: number }[];
}
export interface SavedModel {
  modelId: string;
  name: string;
  spec: ModelSpec;
  createdAt: string;
}

export type JobState = 'queued' | 'running' | 'done' | 'failed' | 'cancelled';
export type ProgressEvent = ProgressMessage;
export interface QueueJob {
  id: string;
  label: string;
  datasetId: string;
  modelId: string;
  /** The first seed of the job. */
  seed: number;
  /** Every seed the job fits (the kept one is in its fit record's "seeds" section). */
  seeds: number[];
  state: JobState;
  /** Position among queued jobs (0 runs next); null once started. */
  position: number | null;
  progress?: ProgressEvent;
  createdAt: string;
  startedAt?: string;
  finishedAt?: string;
  elapsedS?: number;
  /** Rough estimate from the iterations done so far. */
  remainingS?: number;
  error?: ErrorValue;
  fitId?: string;
}
export interface QueueSnapshot {
  jobs: QueueJob[];
  concurrency: number;
}

/** fit.json: the estimator's record with the post-fit additions. */
export type FitRecordValue = WithPosthoc<FitRecord> | FitRecord;
export interface FitValue {
  fitId: string;
  name: string;
  datasetId: string;
  modelId: string;
  createdAt: string;
  record: FitRecordValue;
}

export interface TargetPreset {
  id: string;
  label: string;
  drug: string;
  source: string;
  sourceStatus: string;
  target: TargetSpec;
}
export interface LiteratureModel {
  id: string;
  name: string;
  source: string;
  structure: string;
  /** The model JSON as stored in resources/models. */
  model: Record<string, unknown>;
}
export interface FileValue {
  fileName: string;
  bytesBase64: string;
}

/** A verification run saved in the project (validation/<runId>/report.json and report.html). */
export interface VerificationRunSummary {
  runId: string;
  mode: 'quick' | 'full';
  status: 'PASS' | 'FAIL';
  startedAt: string;
  durationMs: number;
  total: number;
  passed: number;
  failed: number;
  notRun: number;
}
/** verify.run and verify.get: the report, its printable HTML and where the project keeps them. */
export interface VerificationRun {
  runId: string;
  report: VerificationReport;
  /** Self-contained HTML (main/verify/reportHtml.ts): shown in a sandboxed frame and printed. */
  html: string;
  /** Folder of the project holding report.json and report.html. */
  savedIn: string;
}
/** One check of a running verification: starting (running) or ended. */
export interface VerifyProgressEvent {
  runId: string;
  id: string;
  title: string;
  /** 1-based position of the check in the run, of `total`. */
  index: number;
  total: number;
  status: 'running' | 'pass' | 'fail' | 'not-run';
  durationMs?: number;
}

/** The value each channel answers. */
export interface ResponseMap {
  'app.info': AppInfo;
  'app.acknowledgeCaution': { acknowledgedAt: string };
  'project.summary': ProjectSummary;
  'import.parse': ImportPreview;
  'import.remap': ImportPreview;
  'import.cancel': { cancelled: boolean };
  'import.saveTemplate': { templateId: string };
  'import.templates': TemplateSummary[];
  'import.addToProject': { datasetId: string };
  'dataset.get': Dataset;
  'models.catalogue': CatalogueEntry[];
  'models.save': { modelId: string };
  'models.get': SavedModel;
  'queue.enqueue': { jobIds: string[]; jobId: string };
  'queue.list': QueueSnapshot;
  'queue.cancel': QueueSnapshot;
  'queue.reorder': QueueSnapshot;
  'queue.rerun': { jobIds: string[]; jobId: string };
  'fits.get': FitValue;
  'fits.exportXlsx': FileValue;
  'dosing.targets': TargetPreset[];
  'dosing.literatureModels': LiteratureModel[];
  'dosing.advise': Advice;
  'dosing.cancel': { cancelled: boolean };
  'dosing.saveSession': { sessionId: string };
  'report.pdf': FileValue;
  'verify.run': VerificationRun;
  'verify.cancel': { cancelled: boolean };
  'verify.list': VerificationRunSummary[];
  'verify.get': VerificationRun;
}
export type ResponseOf<C extends Channel> = ResponseMap[C];

export interface EventMap {
  queue: QueueSnapshot;
  progress: ProgressEvent;
  'verify-progress': VerifyProgressEvent;
}
export type EventPayload<E extends EventName> = EventMap[E];

/** 'import.parse' -> 'importParse': the bridge's method name for a channel. */
export type MethodName<C extends string> = C extends `${infer A}.${infer B}` ? `${A}${Capitalize<B>}` : C;

/** Channels whose payload may be left out. */
type NoPayloadChannel = { [C in Channel]: undefined extends RequestOf<C> ? C : never }[Channel];

export type BridgeMethods = {
  [C in Channel as MethodName<C>]: C extends NoPayloadChannel ? (payload?: RequestOf<C>) => Promise<Result<ResponseOf<C>>> : (payload: RequestOf<C>) => Promise<Result<ResponseOf<C>>>;
};

/**
 * `window.plateau` in Electron, the WebSocket client in the web host. Every method answers a
 * Result (never rejects for a service error); `subscribe` delivers events until `signal` aborts.
 */
export interface PlateauBridge extends BridgeMethods {
  invoke<C extends Channel>(channel: C, payload: RequestOf<C>): Promise<Result<ResponseOf<C>>>;
  subscribe<E extends EventName>(event: E, listener: (payload: EventPayload<E>) => void, signal: AbortSignal): void;
}

/** Method name -> channel, for hosts that build the bridge object from the channel list. */
export const BRIDGE_METHODS: Readonly<Record<string, Channel>> = Object.freeze({
  appInfo: 'app.info',
  appAcknowledgeCaution: 'app.acknowledgeCaution',
  projectSummary: 'project.summary',
  importParse: 'import.parse',
  importRemap: 'import.remap',
  importCancel: 'import.cancel',
  importSaveTemplate: 'import.saveTemplate',
  importTemplates: 'import.templates',
  importAddToProject: 'import.addToProject',
  datasetGet: 'dataset.get',
  modelsCatalogue: 'models.catalogue',
  modelsSave: 'models.save',
  modelsGet: 'models.get',
  queueEnqueue: 'queue.enqueue',
  queueList: 'queue.list',
  queueCancel: 'queue.cancel',
  queueReorder: 'queue.reorder',
  queueRerun: 'queue.rerun',
  fitsGet: 'fits.get',
  fitsExportXlsx: 'fits.exportXlsx',
  dosingTargets: 'dosing.targets',
  dosingLiteratureModels: 'dosing.literatureModels',
  dosingAdvise: 'dosing.advise',
  dosingCancel: 'dosing.cancel',
  dosingSaveSession: 'dosing.saveSession',
  reportPdf: 'report.pdf',
  verifyRun: 'verify.run',
  verifyCancel: 'verify.cancel',
  verifyList: 'verify.list',
  verifyGet: 'verify.get',
} satisfies { [C in Channel as MethodName<C>]: C });
