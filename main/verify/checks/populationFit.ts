/**
 * The estimator and the post-fit steps against exact maximum-likelihood references (adaptive
 * Gauss-Hermite quadrature): estimates of seeded fits; -2LL, standard errors and conditional
 * modes at the reference optimum; -2LL and SEs written into a complete fit record.
 */
import { absoluteRow, datasetOf, fmt, relativeRow, seedOf, summarise, tol, type CheckKind } from './common.js';
import { dig, estimateOf } from './fitSession.js';
import type { CheckRow } from '../types.js';

function referenceSe(reference: unknown, path: string | undefined, dataset: string): Record<string, number> {
  const se = path ? dig(reference, path) : undefined;
  if (!se || typeof se !== 'object') throw new Error(`the "${dataset}" reference has no standard errors ("referenceSe" in suite.json)`);
  return se;
}

/** Population estimates of a seeded fit against the exact MLE. */
export const populationFit: CheckKind = {
  describe: (t) => {
    const words: Record<string, string> = { typicalRelative: 'typical values', covariateRelative: 'covariate effects', bsvRelative: 'BSV SDs', residualRelative: 'the residual SD', correlationRelative: 'correlations' };
    return `relative error ${Object.keys(t).filter((k) => typeof t[k] === 'number').map((k) => `<= ${fmt(tol(t, k))} for ${words[k] ?? k}`).join(', ')}`;
  },
  async run(spec, ctx) {
    const name = datasetOf(spec);
    const { entry, reference } = await ctx.fits.load(name);
    const outcome = await ctx.fits.fit(name, seedOf(spec));
    const ref = dig(reference, entry.referenceEstimates) as Record<string, number>;
    const rows = entry.estimates.map((m) => relativeRow(m.label, ref[m.key], estimateOf(outcome.record, m), tol(spec.tolerance, m.tolerance)));
    return { rows, found: summarise(rows, 'estimates') };
  },
};

interface LikelihoodReference {
  minus2LL: number;
  quadratureConvergence: { nodesPerDimension: number; minus2LL: number }[];
  perSubject: { subject: string; logMarginal: number; etaMode: number[] }[];
}

/** -2LL by importance sampling (with its Monte Carlo error) and by Laplace at the reference optimum. */
export const likelihoodAtReference: CheckKind = {
  describe: (t) =>
    `importance-sampling -2LL within ${fmt(tol(t, 'minus2LLAbsolute'))} of the exact -2LL and within ${fmt(tol(t, 'mcErrorMultiple'))} Monte Carlo SEs (+ ${fmt(tol(t, 'mcErrorFloor'))}); each subject's log-likelihood within ${fmt(tol(t, 'perSubjectLogLikAbsolute'))}; Laplace -2LL within ${fmt(tol(t, 'laplaceAbsolute'))} of the 1-node quadrature`,
  async run(spec, ctx) {
    const name = datasetOf(spec);
    const exact = (await ctx.fits.load(name)).reference as LikelihoodReference;
    const r = await ctx.fits.posthocAtReference(name, seedOf(spec));
    const is = r.likelihood.importance;
    const rows: CheckRow[] = [];
    const found = is ? is.minus2LL : NaN;
    rows.push(absoluteRow('-2LL, importance sampling', exact.minus2LL, found, tol(spec.tolerance, 'minus2LLAbsolute')));
    const k = tol(spec.tolerance, 'mcErrorMultiple');
    const floor = tol(spec.tolerance, 'mcErrorFloor');
    const mcError = is ? is.mcError : NaN;
    rows.push({ ...absoluteRow('-2LL within its stated Monte Carlo error', exact.minus2LL, found, k * mcError + floor), limit: `absolute <= ${fmt(k)} x MC error ${fmt(mcError)} + ${fmt(floor)}` });
    const perLimit = tol(spec.tolerance, 'perSubjectLogLikAbsolute');
    exact.perSubject.forEach((s, i) => rows.push(absoluteRow(`log-likelihood of subject ${s.subject}`, s.logMarginal, is ? is.logLik[i] : NaN, perLimit)));
    const oneNode = exact.quadratureConvergence.find((q) => q.nodesPerDimension === 1);
    if (!oneNode) throw new Error(`the "${name}" reference has no 1-node quadrature entry`);
    rows.push(absoluteRow('-2LL, Laplace (= 1-node adaptive quadrature)', oneNode.minus2LL, r.likelihood.laplaceMinus2LL, tol(spec.tolerance, 'laplaceAbsolute')));
    return { rows, found: summarise(rows, 'values') };
  },
};

/** SEs by Louis' formula and by linearisation at the reference optimum against the exact-Hessian SEs. */
export const seAtReference: CheckKind = {
  describe: (t) => `relative error <= ${fmt(tol(t, 'relative'))} for every standard error, by both methods`,
  async run(spec, ctx) {
    const name = datasetOf(spec);
    const { entry, reference } = await ctx.fits.load(name);
    const refSe = referenceSe(reference, entry.referenceSe, name);
    const r = await ctx.fits.posthocAtReference(name, seedOf(spec));
    const limit = tol(spec.tolerance, 'relative');
    const rows: CheckRow[] = [];
    for (const [method, se] of [["Louis' formula", r.standardErrors], ['linearisation', r.standardErrorsLinearised]] as const) {
      // The layout lists the population parameters in the fit record's order, as `estimates` does.
      entry.estimates.forEach((m, q) => rows.push(relativeRow(`SE of ${m.label}, ${method}`, refSe[m.key], (se && se.ok ? se.se[q] : null) ?? NaN, limit)));
    }
    return { rows, found: summarise(rows, 'standard errors') };
  },
};

/** Each subject's conditional mode of the random effects at the reference optimum. */
export const modesAtReference: CheckKind = {
  describe: (t) => `absolute difference <= ${fmt(tol(t, 'absolute'))} in every random effect (transformed scale)`,
  async run(spec, ctx) {
    const name = datasetOf(spec);
    const { reference, model } = await ctx.fits.load(name);
    const exact = reference as LikelihoodReference;
    const r = await ctx.fits.posthocAtReference(name, seedOf(spec));
    const limit = tol(spec.tolerance, 'absolute');
    const d = model.nEta;
    const names = Array.from({ length: d }, (_, k) => `eta ${model.parameters[model.etaParameter[k]]?.name ?? k + 1}`);
    const rows: CheckRow[] = [];
    exact.perSubject.forEach((s, i) => s.etaMode.forEach((m, k) => rows.push(absoluteRow(`subject ${s.subject}, ${names[k]}`, m, r.modes.eta[i * d + k], limit))));
    return { rows, found: summarise(rows, 'random effects') };
  },
};

/** -2LL and SEs of a complete fit record (the `plateau fit` path) against the exact values. */
export const fitLikelihoodSe: CheckKind = {
  describe: (t) => `-2LL within ${fmt(tol(t, 'minus2LLAbsolute'))} of the exact maximum -2LL; relative error <= ${fmt(tol(t, 'seRelative'))} for every SE`,
  async run(spec, ctx) {
    const name = datasetOf(spec);
    const { entry, reference } = await ctx.fits.load(name);
    const refSe = referenceSe(reference, entry.referenceSe, name);
    const record = await ctx.fits.fitWithPosthoc(name, seedOf(spec));
    const rows: CheckRow[] = [absoluteRow('-2LL of the fit (importance sampling)', (reference as LikelihoodReference).minus2LL, record.likelihood.minus2LL ?? NaN, tol(spec.tolerance, 'minus2LLAbsolute'))];
    const limit = tol(spec.tolerance, 'seRelative');
    for (const m of entry.estimates) rows.push(relativeRow(`SE of ${m.label}`, refSe[m.key], estimateOf(record, m, 'se'), limit));
    return { rows, found: summarise(rows, 'values') };
  },
};
