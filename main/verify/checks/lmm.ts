/**
 * The estimator on a linear mixed model (Orthodont; Potthoff & Roy 1964), whose exact maximum
 * likelihood two general-purpose libraries agree on (R nlme::lme ML, statsmodels MixedLM
 * reml=False: reference/lmm). The model goes through the same generic structural-model
 * interface as the PK models: prediction = b0 + b1 (age - centre), identity transforms.
 */
import { createDataset } from '../../../engine/data/dataset.js';
import type { Dataset } from '../../../engine/data/types.js';
import { linearModel } from './linearModel.js';
import type { PkParameterName } from '../../../engine/models/types.js';
import { runSaem } from '../../../engine/saem/saem.js';
import type { ModelSpec, ParameterSpec } from '../../../engine/spec/modelSpec.js';
import { compileModel } from '../../../engine/stats/model.js';
import { absoluteRow, fmt, relativeRow, summarise, tol, throwIfAborted, type CheckKind } from './common.js';
import type { CheckRow } from '../types.js';

/** orthodont.csv (subject, age, distance, sex): level times = age, values = distance. */
function orthodontDataset(csv: string): Dataset {
  const bySubject = new Map<string, { timeH: number; valueMgL: number; censored: boolean }[]>();
  for (const line of csv.trim().split(/\r?\n/).slice(1)) {
    const [subject, age, distance] = line.split(',');
    const list = bySubject.get(subject) ?? [];
    list.push({ timeH: Number(age), valueMgL: Number(distance), censored: false });
    bySubject.set(subject, list);
  }
  return createDataset([...bySubject].map(([id, observations]) => ({ id, covariates: Object.create(null), doses: [], observations })));
}

interface LmmFit { fixedEffects: Record<string, number>; randomEffectSD: Record<string, number>; randomEffectCorrelation: number; residualSD: number }

const VARIANTS = [
  { key: 'age_diagonal', centre: 0, correlated: false, slope: 'age' },
  { key: 'age_unstructured', centre: 0, correlated: true, slope: 'age' },
  { key: 'agec_diagonal', centre: 11, correlated: false, slope: 'age_c' },
  { key: 'agec_unstructured', centre: 11, correlated: true, slope: 'age_c' },
] as const;

export const lmmFit: CheckKind = {
  describe: (t) =>
    `relative error <= ${fmt(tol(t, 'fixedRelative'))} for the fixed effects, <= ${fmt(tol(t, 'sdRelative'))} for the random-effect and residual SDs; random-effect correlation within ${fmt(tol(t, 'correlationAbsolute'))}; against both libraries`,
  async run(spec, ctx) {
    const lme = (await ctx.files.readJson<{ fits: Record<string, LmmFit> }>(spec.reference)).fits;
    if (typeof spec.secondReference !== 'string' || typeof spec.data !== 'string') throw new Error(`suite.json: check ${spec.id} needs "secondReference" and "data"`);
    const mixedlm = (await ctx.files.readJson<{ fits: Record<string, LmmFit> }>(spec.secondReference)).fits;
    const dataset = orthodontDataset(await ctx.files.readText(spec.data));
    const seed = typeof spec.seed === 'number' ? spec.seed : 1;
    const estimation = (spec.estimation ?? {}) as Record<string, unknown>;
    const fixedTol = tol(spec.tolerance, 'fixedRelative');
    const sdTol = tol(spec.tolerance, 'sdRelative');
    const corTol = tol(spec.tolerance, 'correlationAbsolute');
    const rows: CheckRow[] = [];
    for (const v of VARIANTS) {
      throwIfAborted(ctx.signal);
      const parameters = Object.create(null) as Record<string, ParameterSpec>;
      parameters.b0 = { typical: 20, bsv: 2, transform: 'none', fixed: false } as ParameterSpec;
      parameters.b1 = { typical: 0.5, bsv: 0.5, transform: 'none', fixed: false } as ParameterSpec;
      const modelSpec = {
        structure: '1cmt',
        parameters: parameters as ModelSpec['parameters'],
        covariates: [],
        correlations: v.correlated ? [['b0', 'b1'] as unknown as PkParameterName[]] : [],
        residual: { model: 'additive', a: 2 },
        estimation,
      } as unknown as ModelSpec;
      const model = compileModel(modelSpec, dataset, { structuralModel: linearModel(v.centre) });
      const r = await runSaem(model, { seed, ...(ctx.signal ? { signal: ctx.signal } : {}) });
      const om = r.theta.omega;
      const sd0 = Math.sqrt(om[0]);
      const sd1 = Math.sqrt(om[3]);
      for (const [lib, fits] of [['nlme', lme], ['statsmodels', mixedlm]] as const) {
        const f = fits[v.key];
        if (!f) throw new Error(`the LMM reference has no fit "${v.key}"`);
        const p = `${v.key} vs ${lib}`;
        rows.push(relativeRow(`${p}: intercept`, f.fixedEffects['(Intercept)'], r.theta.mu[0], fixedTol));
        rows.push(relativeRow(`${p}: slope`, f.fixedEffects[v.slope], r.theta.mu[1], fixedTol));
        rows.push(relativeRow(`${p}: SD of random intercept`, f.randomEffectSD['(Intercept)'], sd0, sdTol));
        rows.push(relativeRow(`${p}: SD of random slope`, f.randomEffectSD[v.slope], sd1, sdTol));
        if (v.correlated) rows.push(absoluteRow(`${p}: random-effect correlation`, f.randomEffectCorrelation, om[1] / (sd0 * sd1), corTol));
        rows.push(relativeRow(`${p}: residual SD`, f.residualSD, r.theta.a, sdTol));
      }
    }
    return { rows, found: summarise(rows, 'estimates') };
  },
};
