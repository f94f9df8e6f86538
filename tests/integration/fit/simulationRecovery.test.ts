/**
 * SIMULATION RECOVERY (invented data, labelled as such): replicate datasets simulated from known
 * population values with a sparse TDM-like design (intermittent infusions, 2-4 levels per
 * patient), a body-weight effect on clearance and levels below an LLOQ; the estimator must
 * recover the truth. Also: the censored likelihood against dropping the censored levels.
 */
import { describe, expect, it } from 'vitest';
import { createDataset } from '../../../engine/data/dataset.js';
import type { Dataset } from '../../../engine/data/types.js';
import { runSaem } from '../../../engine/saem/saem.js';
import { parseModelSpec } from '../../../engine/spec/modelSpec.js';
import { compileModel } from '../../../engine/stats/model.js';
import { simulateDataset, tdmDesigns } from '../../unit/saem/simulate.js';

const TRUE = { CL: 4, V: 40, omegaCL: 0.3, omegaV: 0.2, exponent: 0.75, b: 0.15 };
const truthSpec = parseModelSpec({
  structure: '1cmt',
  parameters: { CL: { typical: TRUE.CL, bsv: TRUE.omegaCL }, V: { typical: TRUE.V, bsv: TRUE.omegaV } },
  covariates: [{ parameter: 'CL', covariate: 'weight_kg', relation: 'power', reference: 70, coefficient: TRUE.exponent }],
  residual: { model: 'proportional', b: TRUE.b },
});
// Initial values away from the truth, as a user would give them.
const fitSpec = parseModelSpec({
  structure: '1cmt',
  parameters: { CL: { typical: 6, bsv: 0.5 }, V: { typical: 25, bsv: 0.5 } },
  covariates: [{ parameter: 'CL', covariate: 'weight_kg', relation: 'power', reference: 70, coefficient: 0 }],
  residual: { model: 'proportional', b: 0.3 },
});
// Short runs: 30 replicates must stay quick.
const fast = { searchMinIterations: 80, searchMaxIterations: 250, averagingIterations: 100, settleWindow: 30 };

interface Estimates {
  CL: number;
  V: number;
  omegaCL: number;
  omegaV: number;
  exponent: number;
  b: number;
}

async function fit(dataset: Dataset, seed: number): Promise<Estimates> {
  const model = compileModel(fitSpec, dataset);
  const r = await runSaem(model, { seed, settings: fast });
  const e = (name: string) => r.estimates[r.estimateNames.indexOf(name)];
  return { CL: e('CL'), V: e('V'), omegaCL: e('bsv_CL'), omegaV: e('bsv_V'), exponent: e('CL~weight_kg'), b: e('residual_proportional') };
}

function summary(runs: Estimates[]) {
  const out: Record<string, { mean: number; relBiasPct: number; sd: number }> = Object.create(null);
  for (const key of Object.keys(TRUE) as (keyof Estimates)[]) {
    const xs = runs.map((r) => r[key]);
    const mean = xs.reduce((s, x) => s + x, 0) / xs.length;
    const sd = Math.sqrt(xs.reduce((s, x) => s + (x - mean) ** 2, 0) / (xs.length - 1));
    out[key] = { mean, relBiasPct: 100 * (mean / TRUE[key] - 1), sd };
  }
  return out;
}

const dropCensored = (d: Dataset): Dataset =>
  createDataset(d.subjects.map((s) => ({ id: s.id, covariates: { ...s.covariates }, doses: [...s.doses], observations: s.observations.filter((o) => !o.censored) })));

describe('simulation recovery (invented data)', () => {
  it('30 replicates, 40 patients each, 2-4 levels, weight on CL, levels below the LLOQ: mean typical values within 5 % of the truth', async () => {
    const runs: Estimates[] = [];
    let censored = 0;
    let total = 0;
    for (let rep = 0; rep < 30; rep++) {
      const data = simulateDataset(truthSpec, tdmDesigns(40, 1000 + rep), 2000 + rep, 4);
      for (const s of data.subjects) for (const o of s.observations) (total += 1), (censored += o.censored ? 1 : 0);
      runs.push(await fit(data, rep + 1));
    }
    const s = summary(runs);
    console.log(`simulation recovery, ${(100 * censored / total).toFixed(1)} % of ${total} levels censored:`, JSON.stringify(s, null, 1));
    expect(censored / total).toBeGreaterThan(0.03);
    expect(Math.abs(s.CL.relBiasPct)).toBeLessThan(5);
    expect(Math.abs(s.V.relBiasPct)).toBeLessThan(5);
    // Variability and the covariate exponent are less precise with 40 sparse patients: looser, still unbiased.
    expect(Math.abs(s.omegaCL.relBiasPct)).toBeLessThan(15);
    expect(Math.abs(s.omegaV.relBiasPct)).toBeLessThan(25);
    expect(Math.abs(s.exponent.mean - TRUE.exponent)).toBeLessThan(0.1);
    expect(Math.abs(s.b.relBiasPct)).toBeLessThan(10);
  }, 300_000);

  it('with a high LLOQ, the censored likelihood recovers the truth better than dropping the censored levels', async () => {
    const withCens: Estimates[] = [];
    const dropped: Estimates[] = [];
    let censored = 0;
    let total = 0;
    for (let rep = 0; rep < 12; rep++) {
      const data = simulateDataset(truthSpec, tdmDesigns(40, 3000 + rep), 4000 + rep, 8);
      for (const s of data.subjects) for (const o of s.observations) (total += 1), (censored += o.censored ? 1 : 0);
      withCens.push(await fit(data, rep + 1));
      dropped.push(await fit(dropCensored(data), rep + 1));
    }
    const a = summary(withCens);
    const b = summary(dropped);
    console.log(`censoring study, ${(100 * censored / total).toFixed(1)} % censored: censored likelihood`, JSON.stringify(a), 'dropped', JSON.stringify(b));
    expect(censored / total).toBeGreaterThan(0.15);
    const err = (s: typeof a) => Math.abs(s.CL.relBiasPct) + Math.abs(s.V.relBiasPct) + Math.abs(s.omegaCL.relBiasPct) + Math.abs(s.b.relBiasPct);
    expect(err(a)).toBeLessThan(err(b));
    expect(Math.abs(a.CL.relBiasPct)).toBeLessThan(5);
  }, 300_000);
});
