/**
 * The installation verification run: the fixed suite of resources/validation/suite.json against
 * the installed engine, on this machine. One service for every host: the CLI (`plateau verify`),
 * the app (Help > Verify this installation, in the worker) and the tests. Returns the report as
 * plain JSON; rendering (HTML, PDF) is separate (reportHtml.ts, pdf.ts).
 */
import { ENGINE_VERSION } from '../../engine/version.js';
import { CHECK_KINDS } from './checks/index.js';
import { throwIfAborted, type CheckContext } from './checks/common.js';
import { FitSession } from './checks/fitSession.js';
import { appVersion, engineFingerprint, machineInfo } from './environment.js';
import { loadSuite, validationDir, ValidationFiles } from './suite.js';
import type { CheckResult, CheckSpec, VerificationReport, VerifyProgress } from './types.js';

export interface VerifyOptions {
  /** The short suite (`quick: true` checks): under 30 s on a 2-core PC. */
  quick?: boolean;
  onProgress?: (p: VerifyProgress) => void;
  signal?: AbortSignal;
  /** Folder holding suite.json and the references (default: the installation's resources/validation). */
  validationDir?: string;
  /** Installed engine files to fingerprint (default: the engine next to this program). */
  engineDir?: string;
  /** Only these check ids (for tests); the report lists only them. */
  only?: readonly string[];
}

export const SIGN_OFF_LINES = ['Validating pharmacist (name)', 'Signature', 'Date', 'Reviewed by (name, role)', 'Signature', 'Date'];

const nextTurn = () => new Promise<void>((resolve) => setImmediate(resolve));

async function runCheck(spec: CheckSpec, ctx: CheckContext): Promise<CheckResult> {
  const kind = CHECK_KINDS.get(spec.kind);
  const base = {
    id: spec.id,
    part: spec.part,
    title: spec.title,
    purpose: spec.purpose,
    source: spec.source,
    toleranceValues: spec.tolerance,
  };
  const t0 = performance.now();
  let tolerance = '';
  try {
    if (spec.status === 'planned') {
      return { ...base, reference: { file: spec.reference, sha256: null }, tolerance: 'set with the reference', found: 'not run: planned for a later release (reference not yet shipped)', status: 'not-run', rows: [], durationMs: 0 };
    }
    if (!kind) throw new Error(`suite.json: check ${spec.id} has the unknown kind "${spec.kind}"; this program knows ${[...CHECK_KINDS.keys()].join(', ')}`);
    tolerance = kind.describe(spec.tolerance);
    const outcome = await kind.run(spec, ctx);
    const pass = outcome.rows.length > 0 && outcome.rows.every((r) => r.pass);
    return { ...base, reference: { file: spec.reference, sha256: ctx.files.hashOf(spec.reference) }, tolerance, found: outcome.found, status: pass ? 'pass' : 'fail', rows: outcome.rows, durationMs: performance.now() - t0 };
  } catch (e) {
    if ((e as Error).name === 'AbortError' || ctx.signal?.aborted) throw e;
    const message = (e as Error).message || String(e);
    return { ...base, reference: { file: spec.reference, sha256: ctx.files.hashOf(spec.reference) }, tolerance, found: `could not complete: ${message}`, status: 'fail', rows: [], durationMs: performance.now() - t0, error: message };
  }
}

export async function runVerification(options: VerifyOptions = {}): Promise<VerificationReport> {
  const started = new Date();
  const t0 = performance.now();
  const files = new ValidationFiles(options.validationDir ?? validationDir());
  const suite = await loadSuite(files);
  const quick = options.quick === true;
  let selected = suite.checks.filter((c) => !quick || c.quick);
  if (options.only) selected = selected.filter((c) => options.only!.includes(c.id));
  const fits = new FitSession(files, suite.datasets);
  if (options.signal) fits.signal = options.signal;
  const ctx: CheckContext = { files, fits, ...(options.signal ? { signal: options.signal } : {}) };
  const checks: CheckResult[] = [];
  for (let i = 0; i < selected.length; i++) {
    throwIfAborted(options.signal);
    const spec = selected[i];
    options.onProgress?.({ index: i + 1, total: selected.length, id: spec.id, title: spec.title, phase: 'start' });
    await nextTurn();
    const result = await runCheck(spec, ctx);
    checks.push(result);
    options.onProgress?.({ index: i + 1, total: selected.length, id: spec.id, title: spec.title, phase: 'done', status: result.status, durationMs: result.durationMs });
  }
  const engine = await engineFingerprint(...(options.engineDir !== undefined ? [options.engineDir] : []));
  const failed = checks.filter((c) => c.status === 'fail').length;
  const passed = checks.filter((c) => c.status === 'pass').length;
  return {
    format: 'plateau-verification-report/1',
    title: `Plateau ${suite.title.toLowerCase()} report`,
    scope: suite.scope,
    status: failed === 0 && passed > 0 ? 'PASS' : 'FAIL',
    mode: quick ? 'quick' : 'full',
    startedAt: started.toISOString(),
    finishedAt: new Date().toISOString(),
    durationMs: performance.now() - t0,
    application: { name: 'Plateau', version: appVersion(), engineVersion: ENGINE_VERSION },
    engine,
    validationSet: { directory: files.dir, files: files.readFiles() },
    machine: machineInfo(),
    summary: { total: checks.length, passed, failed, notRun: checks.length - passed - failed },
    checks,
    signOff: SIGN_OFF_LINES,
  };
}
