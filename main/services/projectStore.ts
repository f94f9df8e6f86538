/**
 * The project store (docs/architecture.md, "Project store"): a project is a folder.
 *
 *   project.json        index: schema version, name, datasets, templates, models, fits, sessions
 *   queue.json          the fit queue (fitQueue.ts), so a restart shows and resumes it
 *   project.lock        pid of the one process that has the project open
 *   audit.log           append-only JSON lines: who did what, with data hash, model, seed, engine
 *   datasets/<id>/      dataset.json (canonical dataset), import-report.json, mapping.json
 *   templates/<id>.json mapping templates
 *   models/<id>.json    model specs
 *   fits/<id>/fit.json  fit records
 *   dosing/<id>.json    dosing sessions (advice + reviewer)
 *
 * Every write is atomic (files.ts writeFileAtomic): the item file first, the index last, so a
 * crash leaves the old index or the new one, never half of one. A project.json from a newer
 * schema, or one that is not valid, is refused with a clear error and never written over; older
 * schemas are migrated (the original kept beside as project.json.v<N>.bak). Stale temp files of
 * dead writers are removed at open. One process (main) owns a project; writes are serialised.
 */
import { randomBytes } from 'node:crypto';
import { promises as fs, rmSync } from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { z } from 'zod';
import { parseCanonicalCsv } from '../../engine/data/canonicalCsv.js';
import { datasetHash } from '../../engine/data/hash.js';
import type { Dataset } from '../../engine/data/types.js';
import { parseModelSpec, type ModelSpec } from '../../engine/spec/modelSpec.js';
import { ENGINE_VERSION } from '../../engine/version.js';
import type { DatasetSummary, DosingSessionSummary, FitSummary, ModelSummary, ProjectSummary, TemplateSummary, VerificationRunSummary } from '../protocol/bridge.js';
import type { VerificationReport } from '../verify/types.js';
import { datasetFromWire } from './datasetWire.js';
import { MAX_FIT_RECORD_BYTES, readRegularTextFile } from './fileGuard.js';
import { parseJsonText, writeFileAtomic } from './files.js';
import { ServiceError } from './serviceError.js';

export const PROJECT_SCHEMA_VERSION = 1;
export const PROJECT_FILE = 'project.json';
/** Dataset and model files kept parsed in memory (the most recently used). */
const ITEM_CACHE_MAX = 8;

const IsoTime = z.string().max(40);
const ItemId = z.string().regex(/^[A-Za-z0-9][A-Za-z0-9_-]{0,79}$/);
const DatasetEntry = z.strictObject({ id: ItemId, name: z.string(), subjects: z.number(), doses: z.number(), levels: z.number(), censored: z.number(), hash: z.string(), addedAt: IsoTime, source: z.string().optional() });
const TemplateEntry = z.strictObject({ templateId: ItemId, name: z.string(), createdAt: IsoTime });
const ModelEntry = z.strictObject({ id: ItemId, name: z.string(), structure: z.string(), createdAt: IsoTime });
const FitEntry = z.strictObject({ id: ItemId, name: z.string(), datasetId: z.string(), modelId: z.string(), seed: z.number(), createdAt: IsoTime, minus2LL: z.number().nullable(), verdict: z.string().optional(), warnings: z.number() });
const SessionEntry = z.strictObject({ id: ItemId, patientId: z.string(), status: z.string(), createdAt: IsoTime });

export const ProjectFileSchema = z.strictObject({
  format: z.literal('plateau-project'),
  schemaVersion: z.literal(PROJECT_SCHEMA_VERSION),
  name: z.string().max(200),
  createdAt: IsoTime,
  /** Incremented on every write (the kill test reads it). */
  revision: z.number().int().min(0),
  cautionAcknowledgedAt: IsoTime.nullable(),
  datasets: z.array(DatasetEntry),
  templates: z.array(TemplateEntry),
  models: z.array(ModelEntry),
  fits: z.array(FitEntry),
  dosingSessions: z.array(SessionEntry),
});
export type ProjectFile = z.infer<typeof ProjectFileSchema>;

/**
 * Migrations from schema N to N + 1, by N. Schema 0 is the pre-release layout without
 * `revision`, `templates` and `dosingSessions`.
 */
export const MIGRATIONS: ReadonlyMap<number, (old: Record<string, unknown>) => Record<string, unknown>> = new Map([
  [0, (old: Record<string, unknown>) => ({ revision: 0, templates: [], dosingSessions: [], cautionAcknowledgedAt: null, ...old, schemaVersion: 1 })],
]);

export interface AuditEntry {
  action: string;
  /** Item the action concerns (dataset, model, fit, session id). */
  id?: string;
  dataHash?: string;
  model?: string;
  seed?: number;
  detail?: string;
}

function now(): string {
  return new Date().toISOString();
}

/** A new item id: prefix, time (base 36) and randomness, file-name safe. */
export function newId(prefix: string): string {
  return `${prefix}-${Date.now().toString(36)}${randomBytes(3).toString('hex')}`;
}

function who(): string {
  try {
    return os.userInfo().username;
  } catch {
    return process.env.USER ?? process.env.USERNAME ?? 'unknown';
  }
}

/** Parse and check project.json text; migrate older schemas. Throws ServiceError 'file' naming the problem. */
export function parseProjectFile(text: string, file: string): { project: ProjectFile; migratedFrom?: number } {
  const raw = parseJsonText(text, file);
  if (typeof raw !== 'object' || raw === null || Array.isArray(raw) || (raw as { format?: unknown }).format !== 'plateau-project')
    throw new ServiceError('file', `${file} is not a Plateau project file (no "format": "plateau-project"); it was left untouched`);
  let obj = raw as Record<string, unknown>;
  const version = obj.schemaVersion ?? 0;
  if (typeof version !== 'number' || !Number.isInteger(version) || version < 0)
    throw new ServiceError('file', `${file}: schemaVersion ${JSON.stringify(version)} is not a version number; the file was left untouched`);
  if (version > PROJECT_SCHEMA_VERSION)
    throw new ServiceError('file', `${file} was written by a newer Plateau (project schema ${version}; this version reads up to ${PROJECT_SCHEMA_VERSION}): open it with that version. The file was left untouched.`);
  for (let v = version; v < PROJECT_SCHEMA_VERSION; v++) {
    const step = MIGRATIONS.get(v);
    if (!step) throw new ServiceError('file', `${file}: no migration from project schema ${v}; the file was left untouched`);
    obj = step(obj);
  }
  const r = ProjectFileSchema.safeParse(obj);
  if (!r.success)
    throw new ServiceError(
      'file',
      `${file} is damaged (${r.error.issues.length} problem(s)); it was left untouched: restore it from a backup`,
      r.error.issues.slice(0, 20).map((i) => `${i.path.map(String).join('.') || '(file)'}: ${i.message}`),
    );
  return version < PROJECT_SCHEMA_VERSION ? { project: r.data, migratedFrom: version } : { project: r.data };
}

/** Remove temp files (`.<name>.<pid>.<hex>.tmp`) whose writer is no longer running. */
export async function cleanStaleTempFiles(dir: string, depth = 2): Promise<string[]> {
  const removed: string[] = [];
  let entries: import('node:fs').Dirent[];
  try {
    entries = await fs.readdir(dir, { withFileTypes: true });
  } catch {
    return removed;
  }
  for (const e of entries) {
    const full = path.join(dir, e.name);
    if (e.isDirectory() && depth > 0) removed.push(...(await cleanStaleTempFiles(full, depth - 1)));
    const m = /^\..+\.(\d+)\.[0-9a-f]+\.tmp$/.exec(e.name);
    if (!e.isFile() || !m) continue;
    const pid = Number(m[1]);
    let alive = pid !== process.pid;
    if (alive) {
      try {
        process.kill(pid, 0);
      } catch (err) {
        alive = (err as NodeJS.ErrnoException).code === 'EPERM';
      }
    } else alive = false; // ours from an earlier store in this process: no write is in flight at open
    if (!alive) {
      await fs.rm(full, { force: true }).catch(() => undefined);
      removed.push(full);
    }
  }
  return removed;
}

/** pid of the live process that holds the project's lock, if another one does. */
function otherHolder(text: string): number | undefined {
  const pid = Number(/^(\d+)/.exec(text)?.[1]);
  if (!Number.isInteger(pid) || pid <= 0 || pid === process.pid) return undefined;
  try {
    process.kill(pid, 0);
    return pid;
  } catch (e) {
    return (e as NodeJS.ErrnoException).code === 'EPERM' ? pid : undefined;
  }
}

const heldLocks = new Set<string>();
let lockExitHook = false;

/**
 * Take the project's lock (project.lock holding our pid), so two Plateau processes never write
 * one project at once. A lock left by a process that is gone is taken over.
 */
async function takeLock(dir: string): Promise<void> {
  const file = path.join(dir, 'project.lock');
  for (let attempt = 0; attempt < 3; attempt++) {
    try {
      const h = await fs.open(file, 'wx');
      await h.writeFile(`${process.pid}\n`);
      await h.close();
      break;
    } catch (e) {
      if ((e as NodeJS.ErrnoException).code !== 'EEXIST') throw new ServiceError('file', `cannot lock the project in ${dir}: ${(e as Error).message}`);
      const text = await fs.readFile(file, 'utf8').catch(() => '');
      const holder = otherHolder(text);
      if (holder !== undefined) throw new ServiceError('file', `the project in ${dir} is open in another Plateau process (pid ${holder}): close it there first`);
      if (Number(/^(\d+)/.exec(text)?.[1]) === process.pid) break;
      await fs.rm(file, { force: true });
    }
  }
  heldLocks.add(file);
  if (!lockExitHook) {
    lockExitHook = true;
    process.once('exit', () => {
      for (const f of heldLocks) rmSync(f, { force: true });
    });
  }
}

export interface OpenOptions {
  /** Create the project when the folder has no project.json: 'demo' fills it from resources/demo. */
  create?: 'demo' | 'empty' | false;
  /** resources/ (for the demo). */
  resourcesDir?: string;
  name?: string;
}

export class ProjectStore {
  readonly dir: string;
  private state: ProjectFile;
  private chain: Promise<unknown> = Promise.resolve();
  private queueChain: Promise<unknown> = Promise.resolve();
  /** Set when the project was migrated or temp files were cleaned, for the host's log. */
  readonly notes: string[] = [];

  private constructor(dir: string, state: ProjectFile) {
    this.dir = dir;
    this.state = state;
  }

  get file(): string {
    return path.join(this.dir, PROJECT_FILE);
  }
  get project(): Readonly<ProjectFile> {
    return this.state;
  }

  /** Open (or create) the project in `dir`. */
  static async open(dir: string, options: OpenOptions = {}): Promise<ProjectStore> {
    const abs = path.resolve(dir);
    const file = path.join(abs, PROJECT_FILE);
    let text: string | undefined;
    try {
      text = await readRegularTextFile(file, { what: 'project file' });
    } catch (e) {
      const missing = e instanceof ServiceError && /not found/.test(e.message);
      if (!missing) throw e;
    }
    if (text === undefined) {
      if (!options.create) throw new ServiceError('file', `no Plateau project in ${abs} (project.json not found)`);
      await fs.mkdir(abs, { recursive: true });
      await takeLock(abs);
      const store = new ProjectStore(abs, {
        format: 'plateau-project',
        schemaVersion: PROJECT_SCHEMA_VERSION,
        name: options.name ?? (options.create === 'demo' ? 'Demo ward (invented data, example, not for clinical use)' : path.basename(abs)),
        createdAt: now(),
        revision: 0,
        cautionAcknowledgedAt: null,
        datasets: [],
        templates: [],
        models: [],
        fits: [],
        dosingSessions: [],
      });
      await store.mutate((p) => p);
      await store.audit({ action: 'project.create', detail: options.create === 'demo' ? 'demo project' : 'empty project' });
      if (options.create === 'demo') await store.addDemo(options.resourcesDir);
      return store;
    }
    const { project, migratedFrom } = parseProjectFile(text, file);
    await takeLock(abs);
    const removed = await cleanStaleTempFiles(abs);
    const store = new ProjectStore(abs, project);
    if (removed.length) store.notes.push(`removed ${removed.length} temporary file(s) left by an interrupted save`);
    if (migratedFrom !== undefined) {
      await writeFileAtomic(path.join(abs, `${PROJECT_FILE}.v${migratedFrom}.bak`), text);
      await store.mutate((p) => p);
      await store.audit({ action: 'project.migrate', detail: `schema ${migratedFrom} -> ${PROJECT_SCHEMA_VERSION}` });
      store.notes.push(`project migrated from schema ${migratedFrom} to ${PROJECT_SCHEMA_VERSION} (original kept as ${PROJECT_FILE}.v${migratedFrom}.bak)`);
    }
    return store;
  }

  private async addDemo(resourcesDir: string | undefined): Promise<void> {
    if (!resourcesDir) throw new ServiceError('usage', 'the demo project needs the resources folder (ServiceRoots.resourcesDir)');
    const demo = path.join(resourcesDir, 'demo');
    const dataset = parseCanonicalCsv(await readRegularTextFile(path.join(demo, 'ward-levels.csv'), { what: 'demo dataset' }));
    await this.addDataset('Demo ward levels (invented)', dataset, { source: 'resources/demo/ward-levels.csv' });
    const spec = parseJsonText(await readRegularTextFile(path.join(demo, 'ward-model.json'), { what: 'demo model' }), 'ward-model.json');
    await this.saveModel('Demo one-compartment model (example)', spec);
  }

  /** Release the project's lock once the writes in progress are done. */
  async close(): Promise<void> {
    await this.chain;
    await this.queueChain;
    const file = path.join(this.dir, 'project.lock');
    heldLocks.delete(file);
    await fs.rm(file, { force: true });
  }

  /**
   * The parsed JSON of dataset and model files by id, most recently used last: both are written
   * once under a new id and never changed, so the fit queue need not read and check the same
   * file again for every job. Each get builds its result from a copy, as a read from disk would.
   */
  private readonly itemCache = new Map<string, unknown>();

  private async readItemCached(rel: string, what: string): Promise<unknown> {
    let value = this.itemCache.get(rel);
    if (value === undefined) value = await this.readItem(rel, what);
    this.itemCache.delete(rel);
    this.itemCache.set(rel, value);
    while (this.itemCache.size > ITEM_CACHE_MAX) this.itemCache.delete(this.itemCache.keys().next().value as string);
    return structuredClone(value);
  }

  /** Serialise an operation after every earlier one. */
  private serial<T>(fn: () => Promise<T>): Promise<T> {
    const next = this.chain.then(fn, fn);
    this.chain = next.catch(() => undefined);
    return next;
  }

  /** Change the index and write it atomically; the in-memory state changes only when the write succeeded. */
  mutate(change: (p: ProjectFile) => ProjectFile | void): Promise<ProjectFile> {
    return this.serial(async () => {
      const draft = structuredClone(this.state);
      const next = change(draft) ?? draft;
      next.revision = this.state.revision + 1;
      const checked = ProjectFileSchema.parse(next);
      await writeFileAtomic(this.file, `${JSON.stringify(checked, null, 1)}\n`);
      this.state = checked;
      return checked;
    });
  }

  /** Append one line to audit.log (timestamp, who, engine version and the entry). */
  async audit(entry: AuditEntry): Promise<void> {
    const line = JSON.stringify({ at: now(), who: who(), engineVersion: ENGINE_VERSION, ...entry });
    const h = await fs.open(path.join(this.dir, 'audit.log'), 'a');
    try {
      await h.appendFile(`${line}\n`);
      await h.sync();
    } finally {
      await h.close();
    }
  }

  /** The audit log's entries; a last line cut short by a crash is skipped. */
  async readAudit(): Promise<Record<string, unknown>[]> {
    let text = '';
    try {
      text = await fs.readFile(path.join(this.dir, 'audit.log'), 'utf8');
    } catch {
      return [];
    }
    const out: Record<string, unknown>[] = [];
    for (const line of text.split('\n')) {
      if (!line.trim()) continue;
      try {
        out.push(JSON.parse(line) as Record<string, unknown>);
      } catch {
        // an interrupted append
      }
    }
    return out;
  }

  private async writeItem(rel: string, value: unknown): Promise<void> {
    const file = path.join(this.dir, rel);
    await fs.mkdir(path.dirname(file), { recursive: true });
    await writeFileAtomic(file, `${JSON.stringify(value, null, 1)}\n`);
  }

  private async readItem(rel: string, what: string): Promise<unknown> {
    const file = path.join(this.dir, rel);
    return parseJsonText(await readRegularTextFile(file, { what, maxBytes: MAX_FIT_RECORD_BYTES }), file);
  }

  summary(): ProjectSummary {
    const p = this.state;
    return {
      name: p.name,
      path: this.dir,
      schemaVersion: p.schemaVersion,
      datasets: p.datasets.map(({ source: _s, ...d }): DatasetSummary => d),
      models: p.models.map((m): ModelSummary => ({ ...m })),
      fits: p.fits.map((f): FitSummary => ({ ...f })),
      dosingSessions: p.dosingSessions.map((s): DosingSessionSummary => ({ ...s })),
    };
  }

  async acknowledgeCaution(): Promise<string> {
    const at = now();
    await this.mutate((p) => void (p.cautionAcknowledgedAt = at));
    await this.audit({ action: 'caution.acknowledge' });
    return at;
  }

  async rename(name: string): Promise<void> {
    if (!name.trim() || name.length > 200) throw new ServiceError('usage', 'a project name has 1 to 200 characters');
    await this.mutate((p) => void (p.name = name));
  }

  // --- datasets ---------------------------------------------------------------------------

  async addDataset(name: string, dataset: Dataset, extra: { report?: unknown; mapping?: unknown; source?: string } = {}): Promise<string> {
    const id = newId('d');
    const hash = datasetHash(dataset);
    await this.writeItem(`datasets/${id}/dataset.json`, dataset);
    if (extra.report !== undefined) await this.writeItem(`datasets/${id}/import-report.json`, extra.report);
    if (extra.mapping !== undefined) await this.writeItem(`datasets/${id}/mapping.json`, extra.mapping);
    let doses = 0;
    let levels = 0;
    let censored = 0;
    for (const s of dataset.subjects) {
      doses += s.doses.length;
      levels += s.observations.length;
      censored += s.observations.filter((o) => o.censored).length;
    }
    await this.mutate((p) => void p.datasets.push({ id, name, subjects: dataset.subjects.length, doses, levels, censored, hash, addedAt: now(), ...(extra.source ? { source: extra.source } : {}) }));
    await this.audit({ action: 'dataset.add', id, dataHash: hash, detail: name });
    return id;
  }

  private need<T extends { id: string }>(list: readonly T[], id: string, what: string): T {
    const e = list.find((x) => x.id === id);
    if (!e) throw new ServiceError('usage', `no ${what} with id ${id} in this project`);
    return e;
  }

  async getDataset(id: string): Promise<Dataset> {
    this.need(this.state.datasets, id, 'dataset');
    return datasetFromWire(await this.readItemCached(`datasets/${id}/dataset.json`, 'dataset'));
  }

  datasetEntry(id: string) {
    return this.need(this.state.datasets, id, 'dataset');
  }

  // --- templates ---------------------------------------------------------------------------

  async saveTemplate(name: string, mapping: unknown): Promise<string> {
    const templateId = newId('t');
    await this.writeItem(`templates/${templateId}.json`, mapping);
    await this.mutate((p) => void p.templates.push({ templateId, name, createdAt: now() }));
    await this.audit({ action: 'template.save', id: templateId, detail: name });
    return templateId;
  }

  listTemplates(): TemplateSummary[] {
    return this.state.templates.map((t) => ({ ...t }));
  }

  async getTemplate(templateId: string): Promise<unknown> {
    if (!this.state.templates.some((t) => t.templateId === templateId)) throw new ServiceError('usage', `no mapping template with id ${templateId} in this project`);
    return this.readItem(`templates/${templateId}.json`, 'mapping template');
  }

  // --- models ------------------------------------------------------------------------------

  async saveModel(name: string, specJson: unknown): Promise<string> {
    const spec = parseModelSpec(specJson);
    const id = newId('m');
    await this.writeItem(`models/${id}.json`, { name, createdAt: now(), spec: specJson });
    await this.mutate((p) => void p.models.push({ id, name, structure: spec.structure, createdAt: now() }));
    await this.audit({ action: 'model.save', id, model: spec.structure, detail: name });
    return id;
  }

  async getModel(id: string): Promise<{ modelId: string; name: string; createdAt: string; spec: ModelSpec; specJson: Record<string, unknown> }> {
    const e = this.need(this.state.models, id, 'model');
    const item = (await this.readItemCached(`models/${id}.json`, 'model spec')) as { spec?: unknown };
    return { modelId: id, name: e.name, createdAt: e.createdAt, spec: parseModelSpec(item.spec), specJson: item.spec as Record<string, unknown> };
  }

  // --- fits --------------------------------------------------------------------------------

  async saveFit(meta: { name: string; datasetId: string; modelId: string; seed: number }, record: Record<string, unknown>): Promise<string> {
    const id = newId('f');
    await this.writeItem(`fits/${id}/fit.json`, record);
    const likelihood = record.likelihood as { minus2LL?: unknown } | undefined;
    const minus2LL = typeof likelihood?.minus2LL === 'number' && Number.isFinite(likelihood.minus2LL) ? likelihood.minus2LL : null;
    // The seeds' verdict of a multi-seed fit.
    const agreement = record.seeds as { verdict?: unknown } | undefined;
    const warnings = Array.isArray(record.warnings) ? record.warnings.length : 0;
    await this.mutate((p) => void p.fits.push({ id, ...meta, createdAt: now(), minus2LL, ...(typeof agreement?.verdict === 'string' ? { verdict: agreement.verdict } : {}), warnings }));
    const spec = record.spec as { structure?: unknown } | undefined;
    await this.audit({ action: 'fit.save', id, dataHash: String(record.dataHash ?? ''), model: `${meta.modelId} (${String(spec?.structure ?? '?')})`, seed: meta.seed, detail: meta.name });
    return id;
  }

  fitEntry(id: string) {
    return this.need(this.state.fits, id, 'fit');
  }

  async getFit(id: string): Promise<Record<string, unknown>> {
    this.need(this.state.fits, id, 'fit');
    return (await this.readItem(`fits/${id}/fit.json`, 'fit record')) as Record<string, unknown>;
  }

  // --- dosing sessions ---------------------------------------------------------------------

  async saveDosingSession(advice: Record<string, unknown>, reviewer?: string): Promise<string> {
    const id = newId('s');
    const patient = advice.patient as { id?: unknown } | undefined;
    const patientId = typeof patient?.id === 'string' ? patient.id : '?';
    const status = typeof advice.status === 'string' ? advice.status : '?';
    await this.writeItem(`dosing/${id}.json`, { savedAt: now(), reviewer: reviewer ?? null, savedBy: who(), advice });
    await this.mutate((p) => void p.dosingSessions.push({ id, patientId, status, createdAt: now() }));
    const model = advice.model as { name?: unknown } | undefined;
    await this.audit({ action: 'dosing.save', id, model: String(model?.name ?? ''), seed: typeof advice.seed === 'number' ? advice.seed : undefined, detail: `patient ${patientId}, status ${status}${reviewer ? `, reviewer ${reviewer}` : ''}` } as AuditEntry);
    return id;
  }

  // --- installation verification runs ------------------------------------------------------

  /**
   * Saves a verification report as validation/<runId>/report.json and report.html (the HTML
   * last, so a folder with report.html is complete) and logs it. No index entry: the folder is
   * the list, so a run saved by an older index can never be lost from it.
   */
  async saveVerification(report: VerificationReport, html: string): Promise<{ runId: string; savedIn: string }> {
    const runId = newId('v');
    const rel = `validation/${runId}`;
    await this.writeItem(`${rel}/report.json`, report);
    await this.serial(() => writeFileAtomic(path.join(this.dir, rel, 'report.html'), html));
    const s = report.summary;
    await this.audit({ action: 'verification.run', id: runId, detail: `verification run (${report.mode}): ${report.status}, ${s.passed} of ${s.total} checks passed, ${s.failed} failed, ${s.notRun} not run; engine files sha256 ${report.engine.sha256}` });
    return { runId, savedIn: path.join(this.dir, rel) };
  }

  /** Saved verification runs, newest first; a folder without a readable report is skipped. */
  async listVerifications(): Promise<VerificationRunSummary[]> {
    const dir = path.join(this.dir, 'validation');
    const names = await fs.readdir(dir).catch(() => [] as string[]);
    const out: VerificationRunSummary[] = [];
    for (const runId of names) {
      if (!ItemId.safeParse(runId).success) continue;
      try {
        const r = (await this.readItem(`validation/${runId}/report.json`, 'verification report')) as VerificationReport;
        out.push({ runId, mode: r.mode, status: r.status, startedAt: r.startedAt, durationMs: r.durationMs, total: r.summary.total, passed: r.summary.passed, failed: r.summary.failed, notRun: r.summary.notRun });
      } catch {
        // a run whose files were removed or are being written
      }
    }
    return out.sort((a, b) => (a.startedAt < b.startedAt ? 1 : a.startedAt > b.startedAt ? -1 : 0));
  }

  async getVerification(runId: string): Promise<{ runId: string; report: VerificationReport; html: string; savedIn: string }> {
    if (!ItemId.safeParse(runId).success) throw new ServiceError('usage', `"${runId}" is not a verification run id`);
    const rel = `validation/${runId}`;
    const report = (await this.readItem(`${rel}/report.json`, 'verification report')) as VerificationReport;
    if (report?.format !== 'plateau-verification-report/1') throw new ServiceError('file', `${path.join(this.dir, rel, 'report.json')} is not a Plateau verification report`);
    const html = await readRegularTextFile(path.join(this.dir, rel, 'report.html'), { what: 'verification report page' });
    return { runId, report, html, savedIn: path.join(this.dir, rel) };
  }

  // --- queue file (fitQueue.ts owns its shape) ---------------------------------------------

  async readQueueFile(): Promise<unknown> {
    const file = path.join(this.dir, 'queue.json');
    let text: string;
    try {
      text = await readRegularTextFile(file, { what: 'queue file' });
    } catch (e) {
      if (e instanceof ServiceError && /not found/.test(e.message)) return undefined;
      throw e;
    }
    return parseJsonText(text, file);
  }

  /**
   * Written in its own order, apart from the project index and items: queue.json depends on no
   * other file, so a job's state need not wait behind a fit being saved. close() waits for both.
   */
  writeQueueFile(value: unknown): Promise<void> {
    const text = `${JSON.stringify(value, null, 1)}\n`;
    const next = this.queueChain.then(() => writeFileAtomic(path.join(this.dir, 'queue.json'), text));
    this.queueChain = next.catch(() => undefined);
    return next;
  }
}
