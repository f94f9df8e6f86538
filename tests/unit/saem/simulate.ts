/**
 * Simulated datasets for simulation-recovery tests (invented data, labelled as such): draws
 * individual parameters from a population model and levels from its residual error, with
 * levels below an LLOQ marked censored.
 */
import { createDataset, type SubjectInput } from '../../../engine/data/dataset.js';
import type { Dataset, Dose } from '../../../engine/data/types.js';
import { createStreams } from '../../../engine/rng/index.js';
import { parseModelSpec, type ModelSpec } from '../../../engine/spec/modelSpec.js';
import { compileModel } from '../../../engine/stats/model.js';
import { residualSd } from '../../../engine/stats/residual.js';

export interface SimSubjectDesign {
  id: string;
  covariates: Record<string, number | string>;
  doses: Dose[];
  timesH: number[];
}

/**
 * Simulate levels for the designs from the spec taken as the truth (typical, bsv, coefficients,
 * residual). Levels below `lloqMgL` become censored at the LLOQ (when lloqMgL > 0).
 */
export function simulateDataset(truth: ModelSpec, designs: readonly SimSubjectDesign[], seed: number, lloqMgL = 0): Dataset {
  const placeholder = createDataset(
    designs.map((d) => ({ id: d.id, covariates: { ...d.covariates }, doses: d.doses, observations: d.timesH.map((t) => ({ timeH: t, valueMgL: 1, censored: false })) })),
  );
  const model = compileModel(truth, placeholder);
  const root = createStreams(seed);
  const p = model.nParams;
  const mean = new Float64Array(p);
  const phi = new Float64Array(p);
  const factor = model.priorFactor(model.initial.omega)!;
  const inputs: SubjectInput[] = designs.map((d, i) => {
    const rng = root.stream('sim', i);
    model.meanPhi(i, model.initial, mean);
    phi.set(mean);
    const z = Array.from({ length: model.nEta }, () => rng.normal());
    for (let r = 0; r < model.nEta; r++) {
      let v = 0;
      for (let q = 0; q <= r; q++) v += factor.chol[r * model.nEta + q] * z[q];
      phi[model.etaParameter[r]] += v;
    }
    const f = new Float64Array(d.timesH.length);
    model.predict(i, phi, f);
    const { a, b } = model.initial;
    const observations = d.timesH.map((t, k) => {
      const e = rng.normal();
      const y = model.residualModel === 'log-additive' ? f[k] * Math.exp(a * e) : f[k] + residualSd(model.residualModel, a, b, f[k]) * e;
      if (lloqMgL > 0 && y < lloqMgL) return { timeH: t, valueMgL: lloqMgL, censored: true, lloqMgL };
      return { timeH: t, valueMgL: y, censored: false, ...(lloqMgL > 0 ? { lloqMgL } : {}) };
    });
    return { id: d.id, covariates: { ...d.covariates }, doses: d.doses, observations };
  });
  return createDataset(inputs);
}

/**
 * A sparse TDM-like design (invented): intermittent infusions (0.5 h) every 12 h, 2-4 levels per
 * patient at random times (peaks, mid-interval, troughs), body weight 45-110 kg.
 */
export function tdmDesigns(n: number, seed: number, opts: { doses?: number; minLevels?: number; maxLevels?: number } = {}): SimSubjectDesign[] {
  const rng = createStreams(seed).stream('design');
  const nDoses = opts.doses ?? 6;
  const minL = opts.minLevels ?? 2;
  const maxL = opts.maxLevels ?? 4;
  return Array.from({ length: n }, (_, i) => {
    const weight = Math.round(45 + 65 * rng.uniform());
    const doses: Dose[] = Array.from({ length: nDoses }, (_, k) => ({ timeH: 12 * k, amountMg: 1000, route: 'infusion' as const, durationH: 0.5 }));
    const nLevels = minL + rng.int(maxL - minL + 1);
    const times = new Set<number>();
    while (times.size < nLevels) {
      const dose = rng.int(nDoses);
      const kind = rng.int(3);
      const t = 12 * dose + (kind === 0 ? 1 + 0.5 * rng.uniform() : kind === 1 ? 4 + 4 * rng.uniform() : 11.5 + 0.4 * rng.uniform());
      times.add(Math.round(t * 100) / 100);
    }
    return { id: `P${String(i + 1).padStart(4, '0')}`, covariates: { weight_kg: weight }, doses, timesH: [...times].sort((x, y) => x - y) };
  });
}

export { parseModelSpec };
