/**
 * The application service (docs/architecture.md, "Application service"): every channel of the
 * bridge on top of the project store, the fit queue and engine workers. Hosts (Electron IPC, the
 * web host's WebSocket) call `handle(channel, payload)` and `subscribe(event, cb)`; requests are
 * checked here with the protocol's schemas, so a host passes them through unchanged. `handle`
 * never throws: every failure is an ErrorValue. Paths come from the host (ServiceRoots), never
 * guessed from this module's location.
 */
import { promises as fs } from 'node:fs';
import * as path from 'node:path';
import { listStructuralModels } from '../../engine/models/catalogue.js';
import { parseTarget } from '../../engine/dosing/targets.js';
import type { Analysis } from '../../engine/import/analyse.js';
import type { Dataset } from '../../engine/data/types.js';
import { ENGINE_VERSION } from '../../engine/version.js';
import type { CatalogueEntry, EventName, EventPayload, ImportPreview, LiteratureModel, WireResponse, Result, TargetPreset, TimelineSubject, VerificationRun, VerifyProgressEvent } from '../protocol/bridge.js';
import type { VerificationReport } from '../verify/types.js';
import { guardPlainData } from '../protocol/guard.js';
import { RequestEnvelope, type Channel, type RequestOf } from '../protocol/schemas.js';
import { validateRequest } from '../protocol/validate.js';
import type { JobRequest } from '../protocol/worker.js';
import { datasetFromWire } from './datasetWire.js';
import { runEngineJob, type EngineWorkerOptions } from './engineClient.js';
import { readRegularTextFile } from './fileGuard.js';
import { parseJsonText } from './files.js';
import { fitToWorkbookBytes } from './fitExport.js';
import { FitQueue } from './fitQueue.js';
import { ProjectStore } from './projectStore.js';
import { ServiceError, toErrorValue, type ErrorValue } from './serviceError.js';
import { DEFAULT_MAX_FILE_BYTES, DEFAULT_PARSE_TIME_LIMIT_MS } from '../worker/limits.js';

/** Where things are, given by the host at start (an asar package moves them). */
export interface ServiceRoots {
  /** Compiled main/worker/engineWorker.js. */
  workerEntry: string;
  /** The resources/ folder (demo, models, targets, cautions). */
  resourcesDir: string;
  /** The project folder; created with the demo project on first run. */
  projectDir: string;
  /**
   * The installed engine files (dist/engine), fingerprinted in the verification report. Without
   * it verify.run refuses (the hash must be of the files that run, never a guessed folder).
   */
  engineDir?: string;
  /** The built renderer (for hosts that serve it; unused by the services). */
  rendererDir?: string;
  host: 'electron' | 'web';
  appVersion?: string;
  /** Fit jobs at once (default cores - 1, at least 1). */
  concurrency?: number;
  /** Spawner for worker processes (Electron's utilityProcess adapter); default child_process.fork. */
  spawn?: EngineWorkerOptions['spawn'];
  /** Where rejected requests and notes are logged (default stderr). */
  log?: (line: string) => void;
}

/** Parse jobs of the app keep their previews here for remap, template and add (the latest few). */
interface ImportSession {
  fileName: string;
  bytes: Uint8Array;
  options: Record<string, unknown>;
  analysis: Analysis;
  dataset: Dataset | undefined;
  previewRows: { sheet: string; rows: string[][] }[];
}
const MAX_IMPORT_SESSIONS = 4;
const ADVICE_TIME_LIMIT_MS = 10 * 60_000;
/** The full verification takes about 3 minutes on a 2-core PC; a slow PC gets room. */
const VERIFY_TIME_LIMIT_MS = 20 * 60_000;

/** Which cancel channel stops a request's engine job. */
type CancelScope = 'dosing' | 'import';

type Handler<C extends Channel> = (payload: RequestOf<C>) => Promise<unknown>;

export class AppService {
  private readonly imports = new Map<string, ImportSession>();
  /** Engine jobs of requests that carry a request id, by "scope:requestId". */
  private readonly running = new Map<string, AbortController>();
  private readonly verifyListeners = new Set<(p: VerifyProgressEvent) => void>();
  /** The verification running now (one at a time). */
  private verifying: { runId: string; abort: AbortController } | undefined;
  private readonly log: (line: string) => void;
  private constructor(
    readonly roots: ServiceRoots,
    readonly store: ProjectStore,
    readonly queue: FitQueue,
  ) {
    this.log = roots.log ?? ((line) => process.stderr.write(`plateau: ${line}\n`));
  }

  static async start(roots: ServiceRoots): Promise<AppService> {
    const store = await ProjectStore.open(roots.projectDir, { create: 'demo', resourcesDir: roots.resourcesDir });
    const queue = await FitQueue.open(store, { worker: workerOptions(roots), ...(roots.concurrency !== undefined ? { concurrency: roots.concurrency } : {}) });
    const app = new AppService(roots, store, queue);
    for (const n of [...store.notes, ...queue.notes]) app.log(n);
    return app;
  }

  /** Answer one request. Never throws. */
  async handle(channel: unknown, payload: unknown): Promise<Result<unknown>> {
    const checked = validateRequest(channel, payload);
    if (!checked.ok) {
      this.log(`refused a request: ${checked.error.message}`);
      return { ok: false, error: checked.error };
    }
    try {
      const handler = this.handlers[checked.channel] as Handler<Channel>;
      return { ok: true, value: await handler(checked.payload) };
    } catch (e) {
      const error: ErrorValue = toErrorValue(e);
      if (error.kind === 'internal') this.log(`${checked.channel}: ${error.message}`);
      return { ok: false, error };
    }
  }

  /**
   * Answer one wire message `{id, channel, payload}` (the web host's WebSocket): the envelope is
   * checked too; a message without a usable id is answered with id "".
   */
  async handleEnvelope(raw: unknown): Promise<WireResponse> {
    const why = guardPlainData(raw);
    const env = why === undefined ? RequestEnvelope.safeParse(raw) : undefined;
    if (!env?.success) {
      const id = typeof raw === 'object' && raw !== null && typeof (raw as { id?: unknown }).id === 'string' ? (raw as { id: string }).id.slice(0, 100) : '';
      const reason = why ?? env?.error.issues.slice(0, 3).map((i) => `${i.path.join('.') || '(message)'}: ${i.message}`).join('; ') ?? 'malformed';
      this.log(`refused a message: ${reason}`);
      return { id, ok: false, error: { kind: 'usage', message: `the message is malformed: ${reason}`, problems: [reason] } };
    }
    return { id: env.data.id, ...(await this.handle(env.data.channel, env.data.payload)) };
  }

  subscribe<E extends EventName>(event: E, listener: (payload: EventPayload<E>) => void): () => void {
    if (event === 'queue') return this.queue.onQueue(listener as (p: EventPayload<'queue'>) => void);
    if (event === 'progress') return this.queue.onProgress(listener as (p: EventPayload<'progress'>) => void);
    if (event === 'verify-progress') {
      const l = listener as (p: VerifyProgressEvent) => void;
      this.verifyListeners.add(l);
      return () => void this.verifyListeners.delete(l);
    }
    return () => undefined;
  }

  async close(): Promise<void> {
    this.verifying?.abort.abort();
    for (const abort of this.running.values()) abort.abort();
    await this.queue.close();
    await this.store.close();
  }

  // --- helpers -----------------------------------------------------------------------------

  private async caution(): Promise<{ title: string; text: string }> {
    const file = path.join(this.roots.resourcesDir, 'cautions', 'dosing.json');
    const json = parseJsonText(await readRegularTextFile(file, { what: 'caution text' }), file) as { text?: unknown; title?: unknown };
    if (typeof json.text !== 'string' || !json.text.trim()) throw new ServiceError('file', `${file}: the caution text is missing; dose advice is never given without it`);
    return { title: typeof json.title === 'string' ? json.title : 'Caution', text: json.text };
  }

  private async resourceJson(sub: string, id: string): Promise<Record<string, unknown>> {
    if (!/^[A-Za-z0-9][A-Za-z0-9_-]{0,79}$/.test(id)) throw new ServiceError('usage', `"${id}" is not a resource id`);
    const file = path.join(this.roots.resourcesDir, sub, `${id}.json`);
    return parseJsonText(await readRegularTextFile(file, { what: `${sub} entry` }), file) as Record<string, unknown>;
  }

  private async resourceIds(sub: string): Promise<string[]> {
    const files = await fs.readdir(path.join(this.roots.resourcesDir, sub)).catch(() => [] as string[]);
    return files.filter((f) => f.endsWith('.json')).map((f) => f.slice(0, -5)).sort();
  }

  /**
   * Run one engine job in its own worker process. With a request id, the job can be stopped by
   * the scope's cancel channel (dosing.cancel, import.cancel): the abort reaches the worker the
   * same way a fit's cancel does (EngineWorker.cancel: a cancel message, then the process is
   * ended if it does not answer), and the request fails with kind 'cancelled'.
   */
  private async runJob(job: JobRequest, timeLimitMs: number, cancel?: { scope: CancelScope; requestId: string | undefined }): Promise<unknown> {
    const key = cancel?.requestId !== undefined ? `${cancel.scope}:${cancel.requestId}` : undefined;
    if (key !== undefined && this.running.has(key)) throw new ServiceError('usage', `request ${cancel!.requestId} is already running: give each request its own id`);
    const abort = new AbortController();
    if (key !== undefined) this.running.set(key, abort);
    try {
      return await runEngineJob(job, { ...workerOptions(this.roots), jobTimeLimitMs: timeLimitMs }, { signal: abort.signal });
    } finally {
      if (key !== undefined) this.running.delete(key);
    }
  }

  /** Stop the engine job of one request; false when it is not running (already ended, or never started). */
  private cancelRequest(scope: CancelScope, requestId: string): { cancelled: boolean } {
    const abort = this.running.get(`${scope}:${requestId}`);
    abort?.abort();
    return { cancelled: abort !== undefined };
  }

  /** Engine jobs that a cancel channel can stop now (for tests and logs). */
  get runningRequests(): number {
    return this.running.size;
  }

  private async parse(fileName: string, bytes: Uint8Array, options: Record<string, unknown>, mapping: unknown, requestId?: string): Promise<ImportSession> {
    const analysis = (await this.runJob({ kind: 'parse', fileName, bytes: bytes as Uint8Array<ArrayBuffer>, options, ...(mapping !== undefined ? { mapping } : {}) }, DEFAULT_PARSE_TIME_LIMIT_MS, { scope: 'import', requestId })) as Analysis & { previewRows?: unknown };
    if (typeof analysis !== 'object' || analysis === null || !Array.isArray(analysis.preview) || typeof analysis.report !== 'object')
      throw new ServiceError('worker', 'the import worker answered with an incomplete analysis; the file was not imported');
    const dataset = analysis.dataset ? datasetFromWire(analysis.dataset) : undefined;
    const previewRows = Array.isArray(analysis.previewRows)
      ? (analysis.previewRows as { sheet: unknown; rows: unknown }[]).filter((r) => typeof r.sheet === 'string' && Array.isArray(r.rows) && (r.rows as unknown[]).every((row) => Array.isArray(row) && row.every((c) => typeof c === 'string'))) as { sheet: string; rows: string[][] }[]
      : [];
    return { fileName, bytes, options, analysis, dataset, previewRows };
  }

  private remember(importId: string, session: ImportSession): void {
    this.imports.delete(importId);
    this.imports.set(importId, session);
    while (this.imports.size > MAX_IMPORT_SESSIONS) this.imports.delete(this.imports.keys().next().value!);
  }

  private session(importId: string): ImportSession {
    const s = this.imports.get(importId);
    if (!s) throw new ServiceError('usage', `import ${importId} is no longer open: read the file again`);
    return s;
  }

  private preview(importId: string, s: ImportSession): ImportPreview {
    const a = s.analysis;
    const timeline: TimelineSubject[] = (s.dataset?.subjects ?? []).map((sub) => ({
      subject: sub.id,
      doses: sub.doses.map((d) => ({ timeH: d.timeH, amountMg: d.amountMg })),
      levels: sub.observations.map((o) => ({ timeH: o.timeH, concMgL: o.valueMgL, censored: o.censored })),
    }));
    const hasErrors = a.report.problems.some((p) => p.severity === 'error');
    const rows = new Map(s.previewRows.map((r) => [r.sheet, r.rows]));
    const sheets = a.preview.map((sh) => ({ ...sh, previewRows: rows.get(sh.name) ?? [] }));
    return { importId, fileName: s.fileName, sheets, mapping: a.mapping, suggested: a.suggested, skippedSheets: a.skippedSheets, report: a.report, timeline, canAdd: s.dataset !== undefined && !hasErrors };
  }

  /**
   * Installation verification (main/verify) in an engine worker: the suite of the installation's
   * resources/validation against the engine files the host named, progress per check as
   * `verify-progress` events, cancellable with verify.cancel. The report and its HTML are saved
   * in the project (validation/<runId>/) with an audit entry, whatever the result.
   */
  private async verify(quick: boolean): Promise<VerificationRun> {
    if (this.verifying) throw new ServiceError('usage', 'a verification is already running: wait for it to end or cancel it');
    if (!this.roots.engineDir) throw new ServiceError('usage', 'this host gave no engine folder (ServiceRoots.engineDir), so the report could not name the files it checked; start Plateau through its own launcher');
    const abort = new AbortController();
    const runId = `run-${Date.now().toString(36)}`;
    this.verifying = { runId, abort };
    try {
      const value = (await runEngineJob(
        { kind: 'verify', quick, validationDir: path.join(this.roots.resourcesDir, 'validation'), engineDir: this.roots.engineDir },
        { ...workerOptions(this.roots), jobTimeLimitMs: VERIFY_TIME_LIMIT_MS },
        {
          signal: abort.signal,
          onProgress: (m) => {
            if (!m.check) return;
            const event: VerifyProgressEvent = { runId, ...m.check };
            for (const l of this.verifyListeners) {
              try {
                l(event);
              } catch (e) {
                this.log(`verify-progress listener: ${(e as Error).message}`);
              }
            }
          },
        },
      )) as { report?: VerificationReport; html?: unknown };
      const report = value?.report;
      if (!report || report.format !== 'plateau-verification-report/1' || !Array.isArray(report.checks) || typeof value.html !== 'string')
        throw new ServiceError('worker', 'the verification worker answered without a complete report; run the verification again');
      const saved = await this.store.saveVerification(report, value.html);
      return { runId: saved.runId, report, html: value.html, savedIn: saved.savedIn };
    } catch (e) {
      if (abort.signal.aborted) await this.store.audit({ action: 'verification.cancel', detail: `verification run (${quick ? 'quick' : 'full'}) cancelled by the user; no report` });
      throw e;
    } finally {
      this.verifying = undefined;
    }
  }

  // --- channels ----------------------------------------------------------------------------

  private readonly handlers: { [C in Channel]: Handler<C> } = {
    'app.info': async () => ({
      appVersion: this.roots.appVersion ?? '0.1.0',
      engineVersion: ENGINE_VERSION,
      host: this.roots.host,
      caution: await this.caution(),
      cautionAcknowledged: this.store.project.cautionAcknowledgedAt !== null,
      cautionAcknowledgedAt: this.store.project.cautionAcknowledgedAt,
      projectPath: this.store.dir,
      concurrency: this.queue.concurrency,
    }),
    'app.acknowledgeCaution': async () => ({ acknowledgedAt: await this.store.acknowledgeCaution() }),
    'project.summary': async () => this.store.summary(),

    'import.parse': async (p) => {
      const bytes = new Uint8Array(Buffer.from(p.bytesBase64, 'base64'));
      if (bytes.length > DEFAULT_MAX_FILE_BYTES) throw new ServiceError('file', `${p.fileName} is above the import limit of ${DEFAULT_MAX_FILE_BYTES / 1048576} MB`);
      if (p.options?.dayFirst && p.options.monthFirst) throw new ServiceError('usage', 'choose day-first or month-first dates, not both');
      const o = p.options ?? {};
      const options: Record<string, unknown> = {};
      if (o.dayFirst) options.dateOrder = 'dayFirst';
      if (o.monthFirst) options.dateOrder = 'monthFirst';
      if (o.decimalComma !== undefined) options.decimalSeparator = o.decimalComma ? 'comma' : 'dot';
      if (o.molarMassGPerMol !== undefined) options.molarMassGPerMol = o.molarMassGPerMol;
      if (o.lloqMgL !== undefined) options.defaultLloqMgL = o.lloqMgL;
      if (o.defaultRoute !== undefined) options.defaultRoute = o.defaultRoute;
      if (o.drug !== undefined) options.drug = o.drug;
      const mapping = p.templateId !== undefined ? await this.store.getTemplate(p.templateId) : undefined;
      const s = await this.parse(p.fileName, bytes, options, mapping, p.requestId);
      const importId = `i-${Date.now().toString(36)}${Math.floor(Math.random() * 1e6).toString(36)}`;
      this.remember(importId, s);
      return this.preview(importId, s);
    },
    'import.remap': async (p) => {
      const old = this.session(p.importId);
      const s = await this.parse(old.fileName, old.bytes, old.options, p.mapping, p.requestId);
      this.remember(p.importId, s);
      return this.preview(p.importId, s);
    },
    'import.cancel': async (p) => this.cancelRequest('import', p.requestId),
    'import.saveTemplate': async (p) => ({ templateId: await this.store.saveTemplate(p.name, this.session(p.importId).analysis.mapping) }),
    'import.templates': async () => this.store.listTemplates(),
    'import.addToProject': async (p) => {
      const s = this.session(p.importId);
      const preview = this.preview(p.importId, s);
      if (!s.dataset || !preview.canAdd)
        throw new ServiceError('data', `${s.fileName} has rows with errors (${s.analysis.report.problems.filter((x) => x.severity === 'error').length}); fix the mapping or the file first: rows are never dropped silently`);
      const datasetId = await this.store.addDataset(p.name, s.dataset, { report: s.analysis.report, mapping: s.analysis.mapping, source: s.fileName });
      return { datasetId };
    },
    'dataset.get': async (p) => this.store.getDataset(p.datasetId),

    'models.catalogue': async () =>
      listStructuralModels().map(
        (m): CatalogueEntry => ({
          id: m.id,
          label: m.label,
          compartments: m.compartments,
          analytic: m.analytic,
          equation: m.equation,
          parameterOrder: [...m.parameterOrder],
          parameters: m.parameters.map((q) => ({ name: q.name, unit: q.unit, description: q.description, defaultInitial: q.defaultInitial, transforms: [...q.transforms], ...(q.defaultWhenAbsent !== undefined ? { defaultWhenAbsent: q.defaultWhenAbsent } : {}) })),
        }),
      ),
    'models.save': async (p) => ({ modelId: await this.store.saveModel(p.name, p.spec) }),
    'models.get': async (p) => {
      const m = await this.store.getModel(p.modelId);
      return { modelId: m.modelId, name: m.name, spec: m.specJson, createdAt: m.createdAt };
    },

    'queue.enqueue': async (p) => {
      const jobIds = await this.queue.enqueue(p);
      return { jobIds, jobId: jobIds[0] };
    },
    'queue.list': async () => this.queue.snapshot(),
    'queue.cancel': async (p) => (await this.queue.cancel(p.jobId), this.queue.snapshot()),
    'queue.reorder': async (p) => (await this.queue.reorder(p.jobIds), this.queue.snapshot()),
    'queue.rerun': async (p) => {
      const jobIds = await this.queue.rerun(p.jobId, p.seeds);
      return { jobIds, jobId: jobIds[0] };
    },

    'fits.get': async (p) => {
      const e = this.store.fitEntry(p.fitId);
      return { fitId: e.id, name: e.name, datasetId: e.datasetId, modelId: e.modelId, createdAt: e.createdAt, record: await this.store.getFit(p.fitId) };
    },
    'fits.exportXlsx': async (p) => {
      const e = this.store.fitEntry(p.fitId);
      const bytes = fitToWorkbookBytes(await this.store.getFit(p.fitId), e.name);
      const safe = e.name.replace(/[^A-Za-z0-9._-]+/g, '-').replace(/^-+|-+$/g, '').slice(0, 80) || e.id;
      return { fileName: `${safe}.xlsx`, bytesBase64: Buffer.from(bytes).toString('base64') };
    },

    'dosing.targets': async () => {
      const out: TargetPreset[] = [];
      for (const id of await this.resourceIds('targets')) {
        const json = await this.resourceJson('targets', id);
        out.push({ id, label: String(json.label ?? id), drug: String(json.drug ?? ''), source: String(json.source ?? ''), sourceStatus: String(json.sourceStatus ?? ''), target: parseTarget(json) });
      }
      return out;
    },
    'dosing.literatureModels': async () => {
      const out: LiteratureModel[] = [];
      for (const id of await this.resourceIds('models')) {
        const json = await this.resourceJson('models', id);
        out.push({ id, name: String(json.name ?? id), source: String(json.source ?? ''), structure: String(json.structure ?? ''), model: json });
      }
      return out;
    },
    'dosing.advise': async (p) => {
      const prior = p.prior;
      const model =
        'fitId' in prior
          ? await this.store.getFit(prior.fitId)
          : 'modelId' in prior
            ? (await this.store.getModel(prior.modelId)).specJson
            : 'literatureModelId' in prior
              ? await this.resourceJson('models', prior.literatureModelId)
              : prior.spec;
      const target = p.target === undefined ? undefined : typeof p.target === 'string' ? await this.resourceJson('targets', p.target) : p.target;
      const o = p.options ?? {};
      const { text } = await this.caution();
      return this.runJob(
        {
          kind: 'advise',
          model,
          patient: p.patient,
          ...(target ? { target } : {}),
          caution: text,
          seed: o.seed ?? 1,
          ...(o.evaluate !== undefined ? { evaluate: o.evaluate } : {}),
          ...(o.draws !== undefined ? { draws: o.draws } : {}),
          ...(o.loadingDose !== undefined ? { loadingDose: o.loadingDose } : {}),
          ...(o.micMgL !== undefined ? { micMgL: o.micMgL } : {}),
          ...(o.belowMgL !== undefined ? { belowMgL: o.belowMgL } : {}),
          ...(o.overrideBlocks !== undefined ? { overrideBlocks: o.overrideBlocks } : {}),
          ...(o.peakDelayH !== undefined ? { peakDelayH: o.peakDelayH } : {}),
          ...(o.nextDoseH !== undefined ? { nextDoseH: o.nextDoseH } : {}),
        },
        ADVICE_TIME_LIMIT_MS,
        { scope: 'dosing', requestId: p.requestId },
      );
    },
    'dosing.cancel': async (p) => this.cancelRequest('dosing', p.requestId),
    'dosing.saveSession': async (p) => {
      if (typeof p.advice.caution !== 'string' || !p.advice.caution) throw new ServiceError('usage', 'the advice to save has no caution text: save the advice record exactly as dosing.advise returned it');
      return { sessionId: await this.store.saveDosingSession(p.advice, p.reviewer) };
    },
    'report.pdf': async () => {
      throw new ServiceError('usage', `PDF reports are made by the ${this.roots.host === 'web' ? 'browser (print the report page)' : 'desktop window'}; this service does not print`);
    },
    'verify.run': async (p) => this.verify(p.quick),
    'verify.cancel': async () => {
      const running = this.verifying;
      running?.abort.abort();
      return { cancelled: running !== undefined };
    },
    'verify.list': async () => this.store.listVerifications(),
    'verify.get': async (p) => this.store.getVerification(p.runId),
  };
}

function workerOptions(roots: ServiceRoots): EngineWorkerOptions {
  return { modulePath: roots.workerEntry, ...(roots.spawn ? { spawn: roots.spawn } : {}) };
}
