/**
 * A linear "structural model" for reference checks of the estimator through the same generic
 * Predictor interface: prediction = b0 + b1 (t - centre), linear in the parameters, identity
 * transforms. With it, the population model is a linear mixed model with an exact ML solution.
 */
import { createDataset } from '../../../engine/data/dataset.js';
import type { Dataset } from '../../../engine/data/types.js';
import type { PkParameterName } from '../../../engine/models/types.js';
export { linearModel } from '../../../main/verify/checks/linearModel.js';
import type { ModelSpec, ParameterSpec } from '../../../engine/spec/modelSpec.js';

export function linearSpec(params: Record<'b0' | 'b1', Partial<ParameterSpec> & { typical: number }>, a: number, correlated: boolean, estimation: Record<string, unknown> = {}): ModelSpec {
  const parameters: Record<string, ParameterSpec> = Object.create(null);
  for (const [k, v] of Object.entries(params)) parameters[k] = { transform: 'none', bsv: null, fixed: false, ...v };
  return {
    structure: '1cmt',
    parameters: parameters as ModelSpec['parameters'],
    covariates: [],
    correlations: correlated ? [['b0', 'b1'] as unknown as PkParameterName[]] : [],
    residual: { model: 'additive', a },
    estimation,
  };
}

/** Orthodont rows (subject, age, distance, sex) as a dataset with level times = age and covariate sex. */
export function orthodontDataset(csv: string): Dataset {
  const lines = csv.trim().split(/\r?\n/).slice(1);
  const bySubject = new Map<string, { timeH: number; valueMgL: number; censored: boolean }[]>();
  const sexOf = new Map<string, string>();
  for (const line of lines) {
    const [subject, age, distance, sex] = line.split(',');
    const list = bySubject.get(subject) ?? [];
    list.push({ timeH: Number(age), valueMgL: Number(distance), censored: false });
    bySubject.set(subject, list);
    sexOf.set(subject, sex);
  }
  return createDataset([...bySubject].map(([id, observations]) => ({ id, covariates: { sex: sexOf.get(id)! }, doses: [], observations })));
}
