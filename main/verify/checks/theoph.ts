/**
 * The estimator, the -2LL, the standard errors and the conditional modes on R's Theoph against
 * the exact maximum-likelihood reference (adaptive Gauss-Hermite quadrature, exact_mle.json).
 */
import { absoluteRow, fmt, relativeRow, summarise, tol, type CheckKind } from './common.js';
import { THEOPH_KEYS } from './theophSession.js';
import type { CheckRow, CheckSpec } from '../types.js';

function seedOf(spec: CheckSpec): number {
  if (typeof spec.seed !== 'number' || !Number.isSafeInteger(spec.seed)) throw new Error(`suite.json: check ${spec.id} needs a whole-number "seed"`);
  return spec.seed;
}

/** Population estimates of a seeded fit against the exact MLE. */
export const theophFit: CheckKind = {
  describe: (t) =>
    `relative error <= ${fmt(tol(t, 'typicalRelative'))} for typical values, <= ${fmt(tol(t, 'bsvRelative'))} for BSV SDs, <= ${fmt(tol(t, 'residualRelative'))} for the residual SD`,
  async run(spec, ctx) {
    const { exact } = await ctx.theoph.load();
    const outcome = await ctx.theoph.fit(seedOf(spec));
    const limits: Record<string, number> = { typical: tol(spec.tolerance, 'typicalRelative'), bsv: tol(spec.tolerance, 'bsvRelative'), residual: tol(spec.tolerance, 'residualRelative') };
    const rows = THEOPH_KEYS.map((k) => {
      const e = outcome.record.population.find((p) => p.kind === k.kind && p.parameter === k.parameter);
      return relativeRow(k.label, exact.estimates[k.key], e ? e.estimate : NaN, limits[k.kind]);
    });
    return { rows, found: summarise(rows, 'estimates') };
  },
};

/** -2LL by importance sampling (with its Monte Carlo error) and by Laplace at the exact MLE. */
export const theophLikelihood: CheckKind = {
  describe: (t) =>
    `importance-sampling -2LL within ${fmt(tol(t, 'minus2LLAbsolute'))} of the exact -2LL and within ${fmt(tol(t, 'mcErrorMultiple'))} Monte Carlo SEs (+ ${fmt(tol(t, 'mcErrorFloor'))}); each subject's log-likelihood within ${fmt(tol(t, 'perSubjectLogLikAbsolute'))}; Laplace -2LL within ${fmt(tol(t, 'laplaceAbsolute'))} of the 1-node quadrature`,
  async run(spec, ctx) {
    const { exact } = await ctx.theoph.load();
    const r = await ctx.theoph.posthocAtExact();
    const is = r.likelihood.importance;
    const rows: CheckRow[] = [];
    const found = is ? is.minus2LL : NaN;
    rows.push(absoluteRow('-2LL, importance sampling', exact.minus2LL, found, tol(spec.tolerance, 'minus2LLAbsolute')));
    const mcLimit = tol(spec.tolerance, 'mcErrorMultiple') * (is ? is.mcError : NaN) + tol(spec.tolerance, 'mcErrorFloor');
    rows.push({ ...absoluteRow('-2LL within its stated Monte Carlo error', exact.minus2LL, found, mcLimit), limit: `absolute <= ${fmt(tol(spec.tolerance, 'mcErrorMultiple'))} x MC error ${fmt(is ? is.mcError : NaN)} + ${fmt(tol(spec.tolerance, 'mcErrorFloor'))}` });
    const perLimit = tol(spec.tolerance, 'perSubjectLogLikAbsolute');
    exact.perSubject.forEach((s, i) => rows.push(absoluteRow(`log-likelihood of subject ${s.subject}`, s.logMarginal, is ? is.logLik[i] : NaN, perLimit)));
    const oneNode = exact.quadratureConvergence.find((q) => q.nodesPerDimension === 1);
    if (!oneNode) throw new Error('exact_mle.json has no 1-node quadrature entry');
    rows.push(absoluteRow('-2LL, Laplace (= 1-node adaptive quadrature)', oneNode.minus2LL, r.likelihood.laplaceMinus2LL, tol(spec.tolerance, 'laplaceAbsolute')));
    return { rows, found: summarise(rows, 'values') };
  },
};

/** SEs by Louis' formula and by linearisation at the exact MLE against the exact-Hessian SEs. */
export const theophSe: CheckKind = {
  describe: (t) => `relative error <= ${fmt(tol(t, 'relative'))} for every standard error, by both methods`,
  async run(spec, ctx) {
    const { exact } = await ctx.theoph.load();
    const r = await ctx.theoph.posthocAtExact();
    const limit = tol(spec.tolerance, 'relative');
    const rows: CheckRow[] = [];
    for (const [method, se] of [["Louis' formula", r.standardErrors], ['linearisation', r.standardErrorsLinearised]] as const) {
      THEOPH_KEYS.forEach((k, q) => {
        const v = se && se.ok ? se.se[q] : null;
        rows.push(relativeRow(`SE of ${k.label}, ${method}`, exact.standardErrors.naturalScale[k.key], v ?? NaN, limit));
      });
    }
    return { rows, found: summarise(rows, 'standard errors') };
  },
};

/** Each subject's conditional mode of the random effects at the exact MLE. */
export const theophModes: CheckKind = {
  describe: (t) => `absolute difference <= ${fmt(tol(t, 'absolute'))} in every random effect (log scale)`,
  async run(spec, ctx) {
    const { exact, model } = await ctx.theoph.load();
    const r = await ctx.theoph.posthocAtExact();
    const limit = tol(spec.tolerance, 'absolute');
    const d = model.nEta;
    const names = ['eta CL', 'eta V', 'eta ka'];
    const rows: CheckRow[] = [];
    exact.perSubject.forEach((s, i) => s.etaMode.forEach((m, k) => rows.push(absoluteRow(`subject ${s.subject}, ${names[k] ?? `eta ${k + 1}`}`, m, r.modes.eta[i * d + k], limit))));
    return { rows, found: summarise(rows, 'random effects') };
  },
};

/** -2LL and SEs of a complete fit record (the `plateau fit` path) against the exact values. */
export const theophFitPosthoc: CheckKind = {
  describe: (t) => `-2LL within ${fmt(tol(t, 'minus2LLAbsolute'))} of the exact maximum -2LL; relative error <= ${fmt(tol(t, 'seRelative'))} for every SE`,
  async run(spec, ctx) {
    const { exact } = await ctx.theoph.load();
    const record = await ctx.theoph.fitWithPosthoc(seedOf(spec));
    const rows: CheckRow[] = [absoluteRow('-2LL of the fit (importance sampling)', exact.minus2LL, record.likelihood.minus2LL ?? NaN, tol(spec.tolerance, 'minus2LLAbsolute'))];
    const limit = tol(spec.tolerance, 'seRelative');
    for (const k of THEOPH_KEYS) {
      const e = record.population.find((p) => p.kind === k.kind && p.parameter === k.parameter);
      rows.push(relativeRow(`SE of ${k.label}`, exact.standardErrors.naturalScale[k.key], e?.se ?? NaN, limit));
    }
    return { rows, found: summarise(rows, 'values') };
  },
};
