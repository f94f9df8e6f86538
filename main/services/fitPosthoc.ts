/**
 * The post-fit steps for a finished fit (engine/posthoc): standard errors, likelihood,
 * per-subject conditional distributions and diagnostics, merged into the fit record. One entry point for the CLI, the worker and the tests.
 */
import { mergePosthoc, posthocRecordFields, PosthocError, runPosthocDiagnostics, runPosthocOnThreads, thetaFromPopulation, type PosthocOptions, type PosthocThreadHost, type WithPosthoc } from '../../engine/posthoc/index.js';
import { assessDegeneracy, type DegeneracyReport } from '../../engine/posthoc/degeneracy.js';
import { naturalToTransformed } from '../../engine/spec/individual.js';
import { threadsForPosthoc } from '../worker/saemThreads.js';
import { fitThreadHost, type FitOutcome } from './fitService.js';

export interface FitPosthocOptions {
  /** Seed of the post-fit random streams (default: the fit's seed). */
  seed?: number;
  posthoc?: Partial<PosthocOptions>;
  /**
   * Cores for the per-subject work of the post-fit steps (default: those granted to the fit,
   * `outcome.threads`); used from POSTHOC_THREADS_MIN_SUBJECTS subjects. A host instead of a
   * number is used as given (tests). The record is the same for any number.
   */
  threads?: number | PosthocThreadHost;
  onStatus?: (message: string) => void | Promise<void>;
  /**
   * Leave the diagnostics (NPDE, VPC, IPRED...) for later: a seed of a multi-seed fit gets them
   * only once it is kept (addDeferredDiagnostics, with the same options). The record is marked
   * `posthoc.diagnosticsDeferred`; everything else in it is final.
   */
  deferDiagnostics?: boolean;
}

export type PosthocFitRecord = WithPosthoc<FitOutcome['record']>;

/** The post-fit steps' start: the estimator's individual estimates on the transformed scale (N x nParams). */
function startPhiOf(model: FitOutcome['model'], record: Pick<FitOutcome['record'], 'individual'>): Float64Array {
  const p = model.nParams;
  const startPhi = new Float64Array(model.nSubjects * p);
  record.individual.forEach((s, i) => model.parameters.forEach((par, j) => (startPhi[i * p + j] = naturalToTransformed(par.transform, s.parameters[par.name]))));
  return startPhi;
}

export async function addPosthoc(outcome: FitOutcome, options: FitPosthocOptions = {}): Promise<PosthocFitRecord> {
  const { model, record } = outcome;
  const seed = options.seed ?? record.seed;
  const theta = thetaFromPopulation(model, record.population);
  const startPhi = startPhiOf(model, record);
  // Deferring means nothing when the caller switched the diagnostics off.
  const defer = options.deferDiagnostics === true && options.posthoc?.diagnostics !== false;
  await options.onStatus?.('post-fit: conditional modes and distributions, standard errors, likelihood, diagnostics');
  let merged: PosthocFitRecord;
  try {
    const wanted = options.threads ?? outcome.threads ?? 1;
    const host = typeof wanted === 'number' ? (threadsForPosthoc(wanted, model.nSubjects) > 1 ? fitThreadHost(threadsForPosthoc(wanted, model.nSubjects)) : undefined) : wanted;
    const r = await runPosthocOnThreads(model, theta, { seed, startPhi, ...(options.posthoc ?? {}), ...(defer ? { diagnostics: false as const } : {}), ...(host ? { threads: host } : {}) });
    merged = mergePosthoc(record, posthocRecordFields(model, r, seed));
    if (defer) merged.posthoc.diagnosticsDeferred = true;
    const minus2LL = r.likelihood.importance ? r.likelihood.importance.minus2LL : Number.isFinite(r.likelihood.linearisedMinus2LL) ? r.likelihood.linearisedMinus2LL : null;
    markDegeneracy(merged, assessDegeneracy({ model, theta, density: r.density, modes: r.modes, minus2LL }));
  } catch (e) {
    if (!(e instanceof PosthocError)) throw e;
    const failed = { ...record, warnings: [...record.warnings, `post-fit steps not run: ${e.message}`] } as unknown as PosthocFitRecord;
    markDegeneracy(failed, assessDegeneracy({ model, theta, minus2LL: null }));
    return failed;
  }
  return merged;
}

/**
 * The diagnostics of a record whose post-fit steps left them for later (addPosthoc with
 * `deferDiagnostics`), with the options addPosthoc had: the record becomes the one addPosthoc
 * gives without deferring, field for field and in the same order (the diagnostics' warnings go
 * where the diagnostics step puts them, after the other post-fit warnings and before the
 * degeneracy warning); only its timing fields differ. A record without the mark is returned as
 * it is.
 */
export async function addDeferredDiagnostics(outcome: { record: PosthocFitRecord; model: FitOutcome['model'] }, options: Omit<FitPosthocOptions, 'deferDiagnostics' | 'threads'> = {}): Promise<PosthocFitRecord> {
  const { model, record } = outcome;
  if (!record.posthoc?.diagnosticsDeferred) return record;
  const seed = options.seed ?? record.seed;
  await options.onStatus?.('post-fit: diagnostics of the kept seed (NPDE, VPC)');
  const { diagnostics, timingMs } = runPosthocDiagnostics(model, thetaFromPopulation(model, record.population), { seed, startPhi: startPhiOf(model, record), ...(options.posthoc ?? {}) });
  const done = { ...record, diagnostics, shrinkage: { ...record.shrinkage, epsilon: finite(diagnostics.epsilonShrinkage) } } as PosthocFitRecord;
  const { diagnosticsDeferred: _deferred, ...posthoc } = record.posthoc;
  done.posthoc = { ...posthoc, timingMs: { ...posthoc.timingMs, diagnostics: timingMs, total: posthoc.timingMs.total + timingMs }, warnings: [...posthoc.warnings, ...diagnostics.warnings] };
  // markDegeneracy added its one warning last, when the fit is not usable as a prior.
  const warnings = [...record.warnings];
  warnings.splice(record.degeneracy && !record.degeneracy.usableAsPrior ? warnings.length - 1 : warnings.length, 0, ...diagnostics.warnings);
  done.warnings = warnings;
  return done;
}

const finite = (x: number | null | undefined): number | null => (x !== null && x !== undefined && Number.isFinite(x) ? x : null);

/** Attach the degeneracy report; a degenerate fit gets a warning that blocks its use as a prior. */
function markDegeneracy(record: { degeneracy?: DegeneracyReport; warnings: string[] }, report: DegeneracyReport): void {
  record.degeneracy = report;
  if (!report.usableAsPrior)
    record.warnings.push(`degenerate fit (${report.findings.map((f) => `${f.code} ${f.parameter}`).join('; ')}): do not use this fit as a prior`);
}

const fmt = (x: number | null | undefined, digits = 5): string =>
  x === null || x === undefined || !Number.isFinite(x) ? '-' : Math.abs(x) >= 1e4 || (Math.abs(x) < 1e-3 && x !== 0) ? x.toExponential(3) : x.toPrecision(digits);

/** Plain-text summary of the post-fit additions for the terminal. */
export function formatPosthocSummary(record: PosthocFitRecord): string {
  const lines: string[] = [];
  if (!('likelihood' in record) || !record.likelihood) return '';
  lines.push('');
  lines.push(`Standard errors (${record.uncertainty.method}):`);
  for (const e of record.population) {
    const label = e.kind === 'typical' ? `${e.parameter} (typical)` : e.kind === 'bsv' ? `BSV ${e.parameter} (omega)` : e.kind === 'covariate' ? `${e.parameter} ~ ${e.covariate}` : e.kind === 'correlation' ? `correlation ${e.parameter}` : `residual ${e.parameter}`;
    lines.push(`  ${label.padEnd(28)} ${fmt(e.estimate).padStart(12)}  SE ${fmt(e.se, 3).padStart(10)} ${(e.unit ?? "").padEnd(12)} RSE ${e.rsePercent === null ? '-' : `${e.rsePercent.toFixed(1)}%`}`);
  }
  if (record.uncertainty.conditionNumber !== null) lines.push(`  condition number of the information: ${fmt(record.uncertainty.conditionNumber, 3)}`);
  const l = record.likelihood;
  lines.push('');
  lines.push(`Likelihood (${l.method}):`);
  lines.push(`  -2LL ${fmt(l.minus2LL, 7)} (Monte Carlo SE ${fmt(l.mcError, 2)}; smallest ESS ${fmt(l.essMin, 3)})`);
  lines.push(`  AIC ${fmt(l.aic, 7)}   BIC (log N) ${fmt(l.bic, 7)}   BICc (log N / log n_obs) ${fmt(l.bicc, 7)}   ${l.nParameters} parameters`);
  lines.push(`  linearised -2LL ${fmt(l.linearised.minus2LL, 7)}   Laplace -2LL ${fmt(l.laplaceMinus2LL, 7)}`);
  const sh = Object.entries(record.shrinkage.eta).map(([k, v]) => `${k} ${v.sd === null ? '-' : `${(100 * v.sd).toFixed(0)}%`}`);
  lines.push('');
  lines.push(`Shrinkage: eta ${sh.join(', ')}; epsilon ${record.shrinkage.epsilon === null ? '-' : `${(100 * record.shrinkage.epsilon).toFixed(0)}%`}`);
  const t = record.diagnostics?.npde.tests;
  if (t) lines.push(`NPDE: mean ${fmt(t.mean, 3)} (p ${fmt(t.meanTest.pValue, 2)}), variance ${fmt(t.variance, 3)} (p ${fmt(t.varianceTest.pValue, 2)}), normality p ${fmt(t.normalityTest.pValue, 2)}, global p ${fmt(t.globalTest.pValue, 2)}`);
  const warnings = record.posthoc.warnings;
  if (warnings.length) {
    lines.push('');
    lines.push('Post-fit warnings:');
    for (const w of warnings) lines.push(`  - ${w}`);
  }
  return lines.join('\n');
}
