/**
 * The engine jobs a worker runs (docs/architecture.md, "Processes"): parse, fit (with its
 * post-fit steps), post-fit alone, the diagnostics a fit left for later, simulate, dose advice,
 * and a probe for the process tests.
 * Every input arrived over a process line, so each is rebuilt through its engine parser
 * (createDataset, parseModelSpec, parsePatient, parseTarget) before use. Values returned are
 * plain JSON data. Errors are thrown; the caller turns them into ErrorValues.
 *
 * The fit's modules are imported with this module, so a job thread started ahead has them
 * loaded before its first fit; the modules of the other jobs (spreadsheet reading, simulation,
 * dose advice, verification) are loaded by their first job, so a worker that only fits never
 * loads them.
 */
import type { FitRecord } from '../../engine/saem/fitRecord.js';
import type { SaemProgress } from '../../engine/saem/saem.js';
import type { SaemSettings } from '../../engine/saem/settings.js';
import { parseModelSpec } from '../../engine/spec/modelSpec.js';
import { compileModel } from '../../engine/stats/model.js';
import { ENGINE_VERSION } from '../../engine/version.js';
import type { JobRequest, ProgressPhase } from '../protocol/worker.js';
import { addDeferredDiagnostics, addPosthoc, type PosthocFitRecord } from '../services/fitPosthoc.js';
import { fitDataset, type FitOutcome } from '../services/fitService.js';
import { debugDetail, ServiceError, toErrorValue } from '../services/serviceError.js';
import { datasetFromWire } from '../services/datasetWire.js';
import { printable } from '../../engine/text/printable.js';
import type { CheckStatus } from '../verify/index.js';

export interface JobProgress {
  phase: ProgressPhase;
  iteration: number;
  maxIterations: number;
  estimates: Record<string, number>;
  message?: string;
  check?: { id: string; title: string; index: number; total: number; status: 'running' | CheckStatus; durationMs?: number };
}

export interface JobContext {
  jobId: string;
  /** Called at most every PROGRESS_MIN_INTERVAL_MS by the caller's throttle. */
  onProgress(p: JobProgress): void;
}

/** JSON round trip: plain data only (typed arrays are converted by the jobs beforehand). */
const plain = <T>(x: T): T => JSON.parse(JSON.stringify(x)) as T;

function saemProgress(p: SaemProgress): JobProgress {
  const estimates = Object.create(null) as Record<string, number>;
  p.estimateNames.forEach((n, i) => {
    if (Number.isFinite(p.estimates[i])) estimates[n] = p.estimates[i];
  });
  return { phase: p.phase, iteration: p.iteration, maxIterations: p.plannedIterations, estimates };
}

async function runFit(job: Extract<JobRequest, { kind: 'fit' }>, ctx: JobContext): Promise<unknown> {
  const dataset = datasetFromWire(job.dataset);
  const spec = parseModelSpec(job.spec);
  const outcome = await fitDataset(dataset, spec, {
    ...(job.seed !== undefined ? { seed: job.seed } : {}),
    ...(job.settings ? { settings: job.settings as Partial<SaemSettings> } : {}),
    ...(job.threads !== undefined ? { threads: job.threads } : {}),
    onProgress: (p) => ctx.onProgress(saemProgress(p)),
  });
  if (job.postFit === false) return plain(outcome.record);
  return plain(await postFit(outcome, undefined, ctx, job.deferDiagnostics === true));
}

const postFitStatus = (ctx: JobContext) => {
  let step = 0;
  return (message: string) => ctx.onProgress({ phase: 'post-fit', iteration: ++step, maxIterations: 1, estimates: Object.create(null), message });
};

async function postFit(outcome: FitOutcome, seed: number | undefined, ctx: JobContext, deferDiagnostics = false): Promise<unknown> {
  return addPosthoc(outcome, {
    ...(seed !== undefined ? { seed } : {}),
    ...(deferDiagnostics ? { deferDiagnostics } : {}),
    onStatus: postFitStatus(ctx),
  });
}

/** A fit record as a job received it, checked for the fields the post-fit steps read. */
function receivedRecord(value: Record<string, unknown>, kind: string): FitRecord {
  const record = value as unknown as FitRecord;
  if (record.format !== 'plateau-fit' || !Array.isArray(record.population) || !Array.isArray(record.individual))
    throw new ServiceError('usage', `${kind}: the record is not a plateau fit record (format "plateau-fit" with population and individual estimates)`);
  return record;
}

/** Rows shown in an import preview, per sheet. */
export const PREVIEW_ROWS = 50;

/**
 * The first PREVIEW_ROWS rows of each sheet as the spreadsheet shows them, control characters
 * escaped (engine/text/printable), for the import view's grid. Empty when the file cannot be
 * read this way (the analysis already said why).
 */
async function previewRows(bytes: Uint8Array): Promise<{ sheet: string; rows: string[][] }[]> {
  const [{ inspectZipContainer }, { readWorkbook }] = await Promise.all([import('./limits.js'), import('../../engine/import/workbook.js')]);
  try {
    let zipEntries: ((p: string) => Uint8Array | undefined) | undefined;
    if (bytes.length >= 4 && bytes[0] === 0x50 && bytes[1] === 0x4b) {
      const zip = inspectZipContainer(bytes);
      if (!zip.ok) return [];
      zipEntries = (p) => zip.entries.get(p);
    }
    const model = readWorkbook(bytes, { maxRows: PREVIEW_ROWS, maxCellChars: 200, ...(zipEntries ? { zipEntries } : {}), decodeUtf8: (b) => Buffer.from(b.buffer, b.byteOffset, b.length).toString('utf8') });
    return model.sheets.map((sh) => ({ sheet: sh.name, rows: sh.rows.slice(0, PREVIEW_ROWS).map((row) => Array.from({ length: Math.min(sh.columnCount, 200) }, (_, c) => printable(row?.[c]?.text ?? ''))) }));
  } catch {
    return [];
  }
}

/**
 * Run one job. An unexpected exception (a bug, not a user error) becomes a message naming the
 * job and its file; the exception's own text only under PLATEAU_DEBUG=1.
 */
export async function runJob(job: JobRequest, ctx: JobContext): Promise<unknown> {
  try {
    return await runJobUnguarded(job, ctx);
  } catch (e) {
    if (toErrorValue(e).kind !== 'internal') throw e;
    const what = job.kind === 'parse' ? `reading ${printable(job.fileName)}` : `the ${job.kind} job`;
    throw new ServiceError('internal', `internal error while ${what}: an unexpected failure in Plateau, not a problem found in your files; run again with PLATEAU_DEBUG=1 to see it${debugDetail(e)}`);
  }
}

async function runJobUnguarded(job: JobRequest, ctx: JobContext): Promise<unknown> {
  switch (job.kind) {
    case 'parse': {
      ctx.onProgress({ phase: 'parse', iteration: 0, maxIterations: 1, estimates: Object.create(null), message: `reading ${job.fileName}` });
      const { handleParseMessage } = await import('./parseWorker.js');
      const r = handleParseMessage({ type: 'parse', id: ctx.jobId, fileName: job.fileName, bytes: job.bytes, ...(job.mapping !== undefined ? { mapping: job.mapping } : {}), ...(job.options ? { options: job.options } : {}), ...(job.maxRows ? { maxRows: job.maxRows } : {}) });
      if (r.type === 'error') throw new ServiceError(r.kind === 'template' ? 'spec' : r.kind === 'request' ? 'usage' : 'file', r.message, r.problems ?? []);
      return { ...plain(r.analysis), previewRows: await previewRows(job.bytes) };
    }
    case 'fit':
      return runFit(job, ctx);
    case 'postFit': {
      const dataset = datasetFromWire(job.dataset);
      const spec = parseModelSpec(job.spec);
      const model = compileModel(spec, dataset);
      const record = receivedRecord(job.record, 'postFit');
      return plain(await postFit({ record, model, dataset, spec }, job.seed, ctx));
    }
    case 'diagnostics': {
      const model = compileModel(parseModelSpec(job.spec), datasetFromWire(job.dataset));
      const record = receivedRecord(job.record, 'diagnostics') as unknown as PosthocFitRecord;
      return plain(await addDeferredDiagnostics({ record, model }, { onStatus: postFitStatus(ctx) }));
    }
    case 'simulate': {
      const dataset = datasetFromWire(job.dataset);
      const spec = parseModelSpec(job.spec);
      ctx.onProgress({ phase: 'simulate', iteration: 0, maxIterations: 1, estimates: Object.create(null) });
      const { simulateDataset } = await import('../cli/simulation.js');
      const r = simulateDataset(spec, dataset, { ...(job.variability ? { variability: true } : {}), ...(job.seed !== undefined ? { seed: job.seed } : {}) });
      return {
        model: r.model.id,
        subjects: r.subjects.map((s) => ({
          id: s.id,
          parameters: plain(s.parameters),
          parameterSource: plain(s.parameterSource),
          predictedMgL: Array.from(s.predictedMgL),
          ...(s.simulatedMgL ? { simulatedMgL: Array.from(s.simulatedMgL) } : {}),
        })),
      };
    }
    case 'advise': {
      ctx.onProgress({ phase: 'advise', iteration: 0, maxIterations: 1, estimates: Object.create(null) });
      const [{ adviseDose }, { parsePatient }, { loadPopulationModel }, { parseRegimen }, { parseTarget }] = await Promise.all([
        import('../../engine/dosing/advise.js'),
        import('../../engine/dosing/patient.js'),
        import('../../engine/dosing/population.js'),
        import('../../engine/dosing/regimens.js'),
        import('../../engine/dosing/targets.js'),
      ]);
      const population = loadPopulationModel(job.model);
      const patient = parsePatient(job.patient);
      if (job.nextDoseH !== undefined) patient.nextDoseH = job.nextDoseH;
      let target = job.target ? parseTarget(job.target) : undefined;
      if (target && job.micMgL !== undefined) target = { ...target, micMgL: job.micMgL };
      if (target && job.peakDelayH !== undefined) target = { ...target, peakDelayH: job.peakDelayH };
      if (!target && (job.micMgL !== undefined || job.peakDelayH !== undefined)) throw new ServiceError('usage', 'an MIC or a peak delay needs a target');
      const advice = adviseDose({
        population,
        patient,
        ...(target ? { target } : {}),
        caution: job.caution,
        seed: job.seed,
        engineVersion: ENGINE_VERSION,
        ...(job.evaluate !== undefined ? { evaluate: parseRegimen(job.evaluate) } : {}),
        ...(job.draws !== undefined ? { nDraws: job.draws } : {}),
        ...(job.loadingDose !== undefined ? { loadingDose: job.loadingDose } : {}),
        ...(job.belowMgL !== undefined ? { belowMgL: job.belowMgL } : {}),
        ...(job.overrideBlocks !== undefined ? { overrideBlocks: job.overrideBlocks } : {}),
      });
      return plain(advice);
    }
    case 'verify': {
      const { renderReportHtml, runVerification } = await import('../verify/index.js');
      const report = await runVerification({
        quick: job.quick,
        validationDir: job.validationDir,
        engineDir: job.engineDir,
        onProgress: (p) =>
          ctx.onProgress({
            phase: 'verify',
            iteration: p.phase === 'done' ? p.index : p.index - 1,
            maxIterations: p.total,
            estimates: Object.create(null),
            message: `${p.phase === 'start' ? 'running' : (p.status ?? 'done')}: ${p.title}`,
            check: { id: p.id, title: p.title, index: p.index, total: p.total, status: p.phase === 'start' ? 'running' : (p.status ?? 'fail'), ...(p.durationMs !== undefined ? { durationMs: p.durationMs } : {}) },
          }),
      });
      return { report: plain(report), html: renderReportHtml(report) };
    }
    case 'probe':
      return runProbe(job, ctx);
  }
}

/** Process-machinery probe: echo, cancellable sleep, busy spin, crash, or a hang of the whole event loop. */
async function runProbe(job: Extract<JobRequest, { kind: 'probe' }>, ctx: JobContext): Promise<unknown> {
  const ms = job.ms ?? 0;
  if (job.mode === 'echo') return job.value ?? null;
  if (job.mode === 'sleep') {
    const t0 = Date.now();
    let i = 0;
    while (Date.now() - t0 < ms) {
      ctx.onProgress({ phase: 'search', iteration: ++i, maxIterations: Math.ceil(ms / 10), estimates: Object.assign(Object.create(null), { x: i }) });
      await new Promise((r) => setTimeout(r, 10));
    }
    return { sleptMs: Date.now() - t0 };
  }
  if (job.mode === 'spin') {
    const t0 = Date.now();
    while (Date.now() - t0 < ms) {
      /* synchronous work, as a post-fit step is */
    }
    return { spunMs: Date.now() - t0 };
  }
  if (job.mode === 'crash') process.exit(3);
  if (job.mode === 'alloc') {
    // Grows until the thread's heap limit stops it (tests of the memory limit).
    const keep: number[][] = [];
    for (;;) keep.push(new Array(1_000_000).fill(1.5));
  }
  throw new ServiceError('usage', `probe mode ${job.mode} runs in the worker's main thread only`);
}
