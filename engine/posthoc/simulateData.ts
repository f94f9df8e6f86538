/**
 * Datasets simulated from a model, for simulation-recovery checks and benchmarks (invented
 * data, to be labelled as such wherever used): the design (doses, level times, covariates) is
 * taken from a template dataset, the levels are drawn from the model at the spec's values
 * (typical values, BSV SDs, correlation values, residual terms) or at a given theta.
 */
import { createDataset, type SubjectInput } from '../data/dataset.js';
import type { Dataset } from '../data/types.js';
import { cholesky } from '../linalg/index.js';
import { createStreams } from '../rng/index.js';
import type { ModelSpec } from '../spec/modelSpec.js';
import { compileModel, type PopulationParameters } from '../stats/model.js';
import { residualSd } from '../stats/residual.js';

export interface SimulateOptions {
  seed: number;
  /** Population parameters to simulate from (default: the spec's values). */
  theta?: PopulationParameters;
  /** Levels below this limit (mg/L) are reported censored at it. */
  lloqMgL?: number;
}

export function simulateDataset(spec: ModelSpec, template: Dataset, options: SimulateOptions): Dataset {
  const model = compileModel(spec, template);
  const theta = options.theta ?? model.initial;
  const d = model.nEta;
  const p = model.nParams;
  const chol = new Float64Array(d * d);
  if (d > 0 && !cholesky(theta.omega, d, chol)) throw new RangeError('simulateDataset: Omega is not positive definite');
  const root = createStreams(options.seed);
  const phi = new Float64Array(p);
  const mean = new Float64Array(p);
  const z = new Float64Array(d);
  const rm = model.residualModel;
  const inputs: SubjectInput[] = model.subjects.map((s, i) => {
    const rng = root.stream('simulate-dataset', i);
    const f = new Float64Array(s.nObs);
    model.meanPhi(i, theta, mean);
    let ok = false;
    for (let attempt = 0; attempt < 100 && !ok; attempt++) {
      for (let k = 0; k < d; k++) z[k] = rng.normal();
      phi.set(mean);
      for (let r = 0; r < d; r++) {
        let v = 0;
        for (let c = 0; c <= r; c++) v += chol[r * d + c] * z[c];
        phi[model.etaParameter[r]] += v;
      }
      ok = model.predict(i, phi, f);
    }
    if (!ok) throw new RangeError(`simulateDataset: no valid prediction for subject ${s.id}`);
    const src = template.subjects[i];
    const lloq = options.lloqMgL;
    return {
      id: s.id,
      covariates: { ...src.covariates },
      doses: src.doses.map((x) => ({ ...x })),
      observations: src.observations.map((o, q) => {
        const e = rng.normal();
        const y = rm === 'log-additive' ? f[q] * Math.exp(theta.a * e) : f[q] + residualSd(rm, theta.a, theta.b, f[q]) * e;
        if (lloq !== undefined && y < lloq) return { timeH: o.timeH, valueMgL: lloq, censored: true, lloqMgL: lloq };
        return { timeH: o.timeH, valueMgL: y, censored: false, ...(lloq !== undefined ? { lloqMgL: lloq } : {}) };
      }),
    };
  });
  return createDataset(inputs, template.covariateNames);
}
