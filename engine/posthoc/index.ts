/**
 * After the fit (DESIGN.md §6): one entry point, `runPosthoc(model, theta)`, that runs every
 * post-fit step at the population estimate, and `posthocRecordFields` / `mergePosthoc`, which
 * turn its result into the fit record's additions (finite numbers or null, never NaN).
 * Order: conditional modes -> conditional distribution (MCMC, proposal from the Laplace
 * approximation at the mode) -> Fisher information (Louis' formula along the kept draws; the
 * linearisation around the modes as the second method) -> log-likelihood (importance sampling
 * from the conditional means and covariances; linearised) -> diagnostics (PRED, IPRED, IWRES,
 * NPDE, VPC). A failure in one step is reported in `warnings` with its consequence.
 */
import type { CompiledModel, PopulationParameters } from '../stats/model.js';
import { concludeConditional, etaShrinkage, resolveConditionalOptions, type ConditionalOptions, type ConditionalResult, type Shrinkage } from './conditional.js';
import { buildDensity, type SubjectDensity } from './density.js';
import { computeDiagnostics, concludeDiagnostics, defaultReplicates, DEFAULT_DIAGNOSTICS, type DiagnosticsOptions, type DiagnosticsResult } from './diagnostics.js';
import { concludeLouis, linearisedInformation, standardErrors, type StandardErrors } from './fisher.js';
import { concludeImportance, informationCriteria, resolveImportanceOptions, type ImportanceOptions, type ImportanceResult, type InformationCriteria } from './likelihood.js';
import { buildLinearisation, linearisedMinus2LL } from './linearised.js';
import { conditionalModes, concludeModes, type ModeResult } from './modes.js';
import { parameterLayout, type ParameterLayout } from './parameters.js';
import { createPosthocBlocks, type PosthocBlockOptions, type PosthocBlocks, type PosthocThreadHost } from './threads.js';

export { thetaFromPopulation } from './parameters.js';
export type { PosthocThreadHost } from './threads.js';

export interface PosthocOptions {
  /** Root of every random stream of the post-fit steps. */
  seed: number;
  /** Starting phi per subject (N x nParams, transformed scale), e.g. the estimator's conditional means. */
  startPhi?: Float64Array;
  conditional?: Partial<ConditionalOptions>;
  importance?: Partial<ImportanceOptions>;
  /** false skips the diagnostics (e.g. inside repeated fits). */
  diagnostics?: Partial<DiagnosticsOptions> | false;
  /** Compute the linearisation-based SEs too (default true). */
  linearisedSe?: boolean;
  /** Milliseconds clock (default Date.now). */
  now?: () => number;
}

export interface LikelihoodSummary {
  importance: ImportanceResult | null;
  criteria: InformationCriteria | null;
  linearisedMinus2LL: number;
  linearisedCriteria: InformationCriteria | null;
  laplaceMinus2LL: number;
}

export interface PosthocResult {
  theta: PopulationParameters;
  layout: ParameterLayout;
  density: SubjectDensity;
  modes: ModeResult;
  conditional: ConditionalResult;
  shrinkage: Shrinkage;
  standardErrors: StandardErrors;
  standardErrorsLinearised: StandardErrors | null;
  likelihood: LikelihoodSummary;
  diagnostics: DiagnosticsResult | null;
  timingMs: { modes: number; conditional: number; standardErrors: number; standardErrorsLinearised: number; likelihood: number; linearised: number; diagnostics: number; total: number };
  warnings: string[];
}

export class PosthocError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'PosthocError';
  }
}

export function runPosthoc(model: CompiledModel, theta: PopulationParameters, options: Partial<PosthocOptions> = {}): PosthocResult {
  const prep = preparePosthoc(model, theta, options);
  return finishPosthoc(prep, createPosthocBlocks(prep.density, prep.blocks));
}

/**
 * runPosthoc with the per-subject work of its costly steps on `threads` (engine/posthoc/threads.ts):
 * the same result to the last bit for any number of threads. Without a host, or with one thread,
 * it is runPosthoc.
 */
export async function runPosthocOnThreads(model: CompiledModel, theta: PopulationParameters, options: Partial<PosthocOptions> & { threads?: PosthocThreadHost } = {}): Promise<PosthocResult> {
  const prep = preparePosthoc(model, theta, options);
  const blocks = createPosthocBlocks(prep.density, prep.blocks, options.threads);
  try {
    await blocks.ready;
    return finishPosthoc(prep, blocks);
  } finally {
    blocks.close();
  }
}

/**
 * The diagnostics step of runPosthoc alone (PRED, IPRED, IWRES, NPDE, VPC, covariate relations),
 * for a fit whose other post-fit steps ran without it (`diagnostics: false`): the conditional
 * modes are found again from the same start (a deterministic optimisation), and the simulations
 * draw from the same streams, so the result is the one runPosthoc gives with the same options
 * (to the last bit; tests/integration/fit/keptDiagnostics.test.ts). A fit from several seeds uses it
 * for the kept seed only.
 */
export function runPosthocDiagnostics(model: CompiledModel, theta: PopulationParameters, options: Partial<PosthocOptions> = {}): { diagnostics: DiagnosticsResult; timingMs: number } {
  if (options.diagnostics === false) throw new Error('internal: runPosthocDiagnostics with the diagnostics switched off');
  const prep = preparePosthoc(model, theta, options);
  const modes = conditionalModes(prep.density, prep.blocks.start ? { start: prep.blocks.start } : {});
  const diagnostics = computeDiagnostics(prep.density, modes, prep.diagnostics!);
  return { diagnostics, timingMs: prep.now() - prep.t0 };
}

interface PreparedPosthoc {
  model: CompiledModel;
  theta: PopulationParameters;
  options: Partial<PosthocOptions>;
  now: () => number;
  t0: number;
  density: SubjectDensity;
  blocks: PosthocBlockOptions;
  diagnostics: DiagnosticsOptions | null;
}

function preparePosthoc(model: CompiledModel, theta: PopulationParameters, options: Partial<PosthocOptions>): PreparedPosthoc {
  const now = options.now ?? Date.now;
  const seed = options.seed ?? 1;
  const t0 = now();
  const density = buildDensity(model, theta);
  if (!density) throw new PosthocError('the estimated Omega is not positive definite: no post-fit computation is possible; check the fit (its warnings) and refit');
  const d = model.nEta;
  const p = model.nParams;
  let start: Float64Array | undefined;
  if (options.startPhi) {
    start = new Float64Array(model.nSubjects * d);
    for (let i = 0; i < model.nSubjects; i++)
      for (let k = 0; k < d; k++) {
        const j = model.etaParameter[k];
        const v = options.startPhi[i * p + j] - density.meanPhi[i * p + j];
        start[i * d + k] = Number.isFinite(v) ? v : 0;
      }
  }
  const diagnostics = options.diagnostics !== false ? { ...DEFAULT_DIAGNOSTICS, seed, ...(options.diagnostics ?? {}) } : null;
  return {
    model,
    theta,
    options,
    now,
    t0,
    density,
    diagnostics,
    blocks: {
      start,
      conditional: resolveConditionalOptions({ seed, ...(options.conditional ?? {}) }),
      importance: resolveImportanceOptions({ seed, ...(options.importance ?? {}) }),
      replicates: diagnostics ? (diagnostics.replicates ?? defaultReplicates(model.nObsTotal)) : null,
      diagnosticsSeed: diagnostics ? diagnostics.seed : seed,
      vpcBins: diagnostics ? diagnostics.vpcBins : DEFAULT_DIAGNOSTICS.vpcBins,
      vpcTime: diagnostics ? diagnostics.vpcTime : DEFAULT_DIAGNOSTICS.vpcTime,
    },
  };
}

/** The steps in order; the per-subject parts through `blocks`, every sum over subjects here in subject order. */
function finishPosthoc(prep: PreparedPosthoc, blocks: PosthocBlocks): PosthocResult {
  const { model, theta, options, now, t0, density } = prep;
  const parts = blocks.parts;
  const warnings: string[] = [];
  blocks.modes();
  const modes = parts.modes;
  concludeModes(model, modes);
  warnings.push(...modes.warnings);
  const t1 = now();
  blocks.conditional();
  const conditional = parts.conditional;
  concludeConditional(model, conditional, prep.blocks.conditional);
  warnings.push(...conditional.warnings);
  const shrinkage = etaShrinkage(density, modes, conditional);
  const t2 = now();
  const layout = parameterLayout(model);
  const omegaOk = blocks.louis();
  const se = standardErrors(model, layout, theta, concludeLouis(model, layout, parts.louis, omegaOk));
  warnings.push(...se.warnings);
  const t3 = now();
  const lin = buildLinearisation(model, modes);
  let seLin: StandardErrors | null = null;
  if (options.linearisedSe !== false) {
    seLin = standardErrors(model, layout, theta, linearisedInformation(lin, layout, theta));
    warnings.push(...seLin.warnings.map((w) => `(second method) ${w}`));
  }
  const t4 = now();
  blocks.importance();
  const importance: ImportanceResult = parts.importance;
  concludeImportance(model, importance, prep.blocks.importance);
  warnings.push(...importance.warnings);
  const isOk = Number.isFinite(importance.minus2LL);
  const t5 = now();
  const linM2 = linearisedMinus2LL(lin, theta);
  if (!Number.isFinite(linM2)) warnings.push('linearised likelihood: a linearised covariance is not positive definite; the linearised -2LL is not available');
  let lap = 0;
  for (let i = 0; i < model.nSubjects; i++) lap += modes.logMarginalLaplace[i];
  const t6 = now();
  let diagnostics: DiagnosticsResult | null = null;
  if (prep.diagnostics && parts.simulation) {
    blocks.simulation();
    blocks.vpc();
    diagnostics = concludeDiagnostics(density, modes, parts.simulation, prep.diagnostics, blocks.vpcPlans());
    warnings.push(...diagnostics.warnings);
  }
  const t7 = now();
  return {
    theta,
    layout,
    density,
    modes,
    conditional,
    shrinkage,
    standardErrors: se,
    standardErrorsLinearised: seLin,
    likelihood: {
      importance,
      criteria: isOk ? informationCriteria(density, layout, importance.minus2LL) : null,
      linearisedMinus2LL: linM2,
      linearisedCriteria: Number.isFinite(linM2) ? informationCriteria(density, layout, linM2) : null,
      laplaceMinus2LL: -2 * lap,
    },
    diagnostics,
    timingMs: { modes: t1 - t0, conditional: t2 - t1, standardErrors: t3 - t2, standardErrorsLinearised: t4 - t3, likelihood: t5 - t4, linearised: t6 - t5, diagnostics: t7 - t6, total: t7 - t0 },
    warnings,
  };
}

const meanOf = (x: ArrayLike<number>): number => {
  let s = 0;
  for (let i = 0; i < x.length; i++) s += x[i];
  return x.length ? s / x.length : 0;
};

const fin = (x: number | null | undefined): number | null => (x !== null && x !== undefined && Number.isFinite(x) ? x : null);

/** The fit record's additions, JSON-ready. */
export interface PosthocRecordFields {
  /** Per population entry, in the record's order. */
  se: (number | null)[];
  rsePercent: (number | null)[];
  uncertainty: {
    method: string;
    labels: string[];
    correlation: number[][] | null;
    conditionNumber: number | null;
    ok: boolean;
    secondMethod: { method: string; se: (number | null)[]; rsePercent: (number | null)[]; conditionNumber: number | null; ok: boolean } | null;
  };
  likelihood: {
    minus2LL: number | null;
    mcError: number | null;
    method: string;
    aic: number | null;
    bic: number | null;
    bicc: number | null;
    nParameters: number;
    nRandomEffectRelated: number;
    samplesPerSubject: number;
    essMin: number | null;
    essMedian: number | null;
    linearised: { minus2LL: number | null; method: string; aic: number | null; bic: number | null; bicc: number | null };
    laplaceMinus2LL: number | null;
    labels: Record<string, string>;
  };
  individual: {
    subject: string;
    mode: Record<string, number | null>;
    mean: Record<string, number | null>;
    sd: Record<string, number | null>;
    shrinkage: Record<string, number | null>;
    quantiles: { p2_5: Record<string, number | null>; p50: Record<string, number | null>; p97_5: Record<string, number | null> };
    settled: boolean;
    iterations: number;
    draws: Record<string, number[]>;
  }[];
  shrinkage: { eta: Record<string, { sd: number | null; variance: number | null; sdConditionalMean: number | null }>; epsilon: number | null; method: string };
  diagnostics: DiagnosticsResult | null;
  /**
   * `diagnosticsDeferred`: the diagnostics were left for later (a seed of a multi-seed fit, which
   * gets them only if it is kept; main/services/fitPosthoc.ts addDeferredDiagnostics); never in a
   * saved fit.
   */
  posthoc: { seed: number; timingMs: PosthocResult['timingMs']; warnings: string[]; diagnosticsDeferred?: true };
}

/** Draws kept per subject in the record (evenly thinned from the conditional draws). */
export const RECORD_DRAWS = 50;

export function posthocRecordFields(model: CompiledModel, r: PosthocResult, seed: number): PosthocRecordFields {
  const p = model.nParams;
  const d = model.nEta;
  const names = model.parameters.map((q) => q.name);
  const rec = (arr: ArrayLike<number>, i: number) => {
    const o: Record<string, number | null> = Object.create(null);
    names.forEach((n, j) => (o[n] = fin(arr[i * p + j])));
    return o;
  };
  const phiRow = new Float64Array(p);
  const natRow = new Float64Array(p);
  const individual = model.subjects.map((s, i) => {
    const sh: Record<string, number | null> = Object.create(null);
    for (let k = 0; k < d; k++) sh[names[model.etaParameter[k]]] = fin(r.shrinkage.individual[i * d + k]);
    // Draws of the parameters with BSV only: the others are one value per subject (its mode),
    // and repeating it 50 times made up half of a sparse-data record.
    const draws: Record<string, number[]> = Object.create(null);
    for (let k = 0; k < d; k++) draws[names[model.etaParameter[k]]] = [];
    const kept = r.conditional.nKept[i];
    const step = Math.max(1, Math.floor(kept / RECORD_DRAWS));
    for (let m = 0, n = 0; m < kept && n < RECORD_DRAWS; m += step, n++) {
      const off = (i * r.conditional.keepDraws + m) * d;
      r.density.phiOf(i, r.conditional.draws.subarray(off, off + d), phiRow);
      model.toNatural(phiRow, natRow);
      for (let k = 0; k < d; k++) draws[names[model.etaParameter[k]]].push(natRow[model.etaParameter[k]]);
    }
    return {
      subject: s.id,
      mode: rec(r.modes.natural, i),
      mean: rec(r.conditional.meanNatural, i),
      sd: rec(r.conditional.sdNatural, i),
      shrinkage: sh,
      quantiles: { p2_5: rec(r.conditional.q025, i), p50: rec(r.conditional.q50, i), p97_5: rec(r.conditional.q975, i) },
      settled: r.conditional.settled[i] === 1,
      iterations: r.conditional.iterations[i],
      draws,
    };
  });
  const eta: PosthocRecordFields['shrinkage']['eta'] = Object.create(null);
  for (let k = 0; k < d; k++)
    eta[names[model.etaParameter[k]]] = { sd: fin(r.shrinkage.etaSd[k]), variance: fin(r.shrinkage.etaVariance[k]), sdConditionalMean: fin(r.shrinkage.etaSdConditionalMean[k]) };
  const is = r.likelihood.importance;
  const ess = is ? Float64Array.from(is.ess).sort() : new Float64Array(0);
  const crit = r.likelihood.criteria;
  const lc = r.likelihood.linearisedCriteria;
  const se = r.standardErrors;
  const sl = r.standardErrorsLinearised;
  return {
    se: se.se.map(fin),
    rsePercent: se.rsePercent.map(fin),
    uncertainty: {
      method: `observed Fisher information by ${se.method}, SEs on the natural scale by the delta method`,
      labels: se.labels,
      correlation: se.correlation,
      conditionNumber: fin(se.conditionNumber),
      ok: se.ok,
      secondMethod: sl ? { method: `observed Fisher information by ${sl.method} around the conditional modes`, se: sl.se.map(fin), rsePercent: sl.rsePercent.map(fin), conditionNumber: fin(sl.conditionNumber), ok: sl.ok } : null,
    },
    likelihood: {
      minus2LL: fin(is?.minus2LL),
      mcError: fin(is?.mcError),
      method: `importance sampling, multivariate Student-t proposal from the conditional means and covariances, up to ${is?.samplesPerSubject ?? 0} samples per subject (mean ${is ? Math.round(meanOf(is.samplesUsed)) : 0} drawn)`,
      aic: fin(crit?.aic),
      bic: fin(crit?.bic),
      bicc: fin(crit?.bicc),
      nParameters: crit?.nParameters ?? r.layout.estimated.length,
      nRandomEffectRelated: crit?.nRandomEffectRelated ?? 0,
      samplesPerSubject: is ? Math.round(meanOf(is.samplesUsed)) : 0,
      essMin: ess.length ? fin(ess[0]) : null,
      essMedian: ess.length ? fin(ess[ess.length >> 1]) : null,
      linearised: { minus2LL: fin(r.likelihood.linearisedMinus2LL), method: 'first-order linearisation around the conditional modes (levels below the LLOQ left out)', aic: fin(lc?.aic), bic: fin(lc?.bic), bicc: fin(lc?.bicc) },
      laplaceMinus2LL: fin(r.likelihood.laplaceMinus2LL),
      labels: {
        minus2LL: '-2 log-likelihood, importance sampling',
        mcError: 'Monte Carlo standard error of minus2LL',
        aic: 'AIC = -2LL + 2 P',
        bic: 'BIC = -2LL + P log(N subjects)',
        bicc: 'BICc = -2LL + P_R log(N subjects) + P_F log(n observations), P_R the parameters tied to random effects (Delattre, Lavielle & Poursat 2014)',
        laplaceMinus2LL: '-2 log-likelihood, Laplace approximation at the conditional modes',
      },
    },
    individual,
    shrinkage: { eta, epsilon: fin(r.diagnostics?.epsilonShrinkage), method: 'eta: 1 - SD(mode) / omega and 1 - var(mode) / omega^2 (Savic & Karlsson 2009); epsilon: 1 - SD(IWRES); per subject: var(eta | y) / omega^2' },
    diagnostics: r.diagnostics,
    posthoc: { seed, timingMs: r.timingMs, warnings: r.warnings },
  };
}

type Individual = PosthocRecordFields['individual'][number];

/** A fit record with the post-fit fields merged in. */
export type WithPosthoc<R extends { population: object[]; individual: { subject: string }[]; warnings: string[] }> = Omit<R, 'population' | 'individual'> & {
  population: (R['population'][number] & { se: number | null; rsePercent: number | null })[];
  individual: (R['individual'][number] & Pick<Individual, 'mode' | 'mean' | 'sd' | 'shrinkage' | 'quantiles' | 'settled' | 'draws'>)[];
  uncertainty: PosthocRecordFields['uncertainty'];
  likelihood: PosthocRecordFields['likelihood'];
  shrinkage: PosthocRecordFields['shrinkage'];
  diagnostics: PosthocRecordFields['diagnostics'];
  posthoc: PosthocRecordFields['posthoc'];
};

/** A fit record (any object with population and individual lists) with the post-fit fields merged in. */
export function mergePosthoc<R extends { population: object[]; individual: { subject: string }[]; warnings: string[] }>(record: R, fields: PosthocRecordFields): WithPosthoc<R> {
  const population = record.population.map((e, q) => ({ ...e, se: fields.se[q] ?? null, rsePercent: fields.rsePercent[q] ?? null }));
  const individual = record.individual.map((s, i) => {
    const f = fields.individual[i];
    return { ...s, mode: f.mode, mean: f.mean, sd: f.sd, shrinkage: f.shrinkage, quantiles: f.quantiles, settled: f.settled, draws: f.draws };
  });
  return {
    ...record,
    population,
    individual,
    uncertainty: fields.uncertainty,
    likelihood: fields.likelihood,
    shrinkage: fields.shrinkage,
    diagnostics: fields.diagnostics,
    posthoc: fields.posthoc,
    warnings: [...record.warnings, ...fields.posthoc.warnings],
  } as WithPosthoc<R>;
}
