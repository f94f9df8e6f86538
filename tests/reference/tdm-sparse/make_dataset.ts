/**
 * A simulated sparse TDM dataset (invented data, a simulation; no real patients): 120 patients on
 * 1000 mg one-hour infusions every 12 h, 1 to 4 levels each (peaks, mid-interval, troughs), levels
 * below 7 mg/L reported censored at that LLOQ. The design is the benchmark's invented TDM design
 * (tests/bench/workloads.ts `tdmDesign`), thinned to 1-4 levels per patient, and the levels are
 * drawn from the two-compartment model `tdmTruth` with additive error 1.5 mg/L (CL with a power CrCl effect, V1 with a power
 * weight effect, Q and V2 without BSV, combined error).
 *
 * Run from the repository root:  npx jiti tests/reference/tdm-sparse/make_dataset.ts
 * Writes tests/reference/tdm-sparse/tdm_sparse.csv (the exact MLE is then computed from it by
 * exact_mle.py).
 */
import { writeFileSync } from 'node:fs';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';
import { writeCanonicalCsv } from '../../../engine/data/canonicalCsv.js';
import { createDataset } from '../../../engine/data/dataset.js';
import { simulateDataset } from '../../../engine/posthoc/simulateData.js';
import { createStreams } from '../../../engine/rng/index.js';
import { parseModelSpec } from '../../../engine/spec/modelSpec.js';
import { tdmDesign, tdmTruth } from '../../bench/workloads.js';

/**
 * The benchmark's truth with a larger additive error (1.5 mg/L): with a = 0.5 the additive part is
 * not identifiable from levels that mostly lie above 7 mg/L (the exact MLE puts a at 0).
 */
export const sparseTdmTruth = parseModelSpec({ ...tdmTruth, residual: { model: 'combined', a: 1.5, b: 0.1 } });

export const SPARSE_TDM = { patients: 120, designSeed: 31, thinSeed: 32, simulationSeed: 33, lloqMgL: 7 } as const;

export function sparseTdmDataset() {
  const design = tdmDesign(SPARSE_TDM.patients, SPARSE_TDM.designSeed);
  const rng = createStreams(SPARSE_TDM.thinSeed).stream('sparse-tdm', 'thin');
  // Keep 1..n_i of each patient's levels (a random subset, in time order).
  const thinned = createDataset(
    design.subjects.map((s) => {
      const keep = Math.min(s.observations.length, 1 + rng.int(4));
      const order = s.observations.map((_, k) => k);
      for (let k = order.length - 1; k > 0; k--) {
        const j = rng.int(k + 1);
        [order[k], order[j]] = [order[j], order[k]];
      }
      const kept = new Set(order.slice(0, keep));
      return { id: s.id, covariates: { ...s.covariates }, doses: s.doses.map((d) => ({ ...d })), observations: s.observations.filter((_, k) => kept.has(k)) };
    }),
    design.covariateNames,
  );
  return simulateDataset(sparseTdmTruth, thinned, { seed: SPARSE_TDM.simulationSeed, lloqMgL: SPARSE_TDM.lloqMgL });
}

if (process.argv[1] && path.resolve(process.argv[1]) === fileURLToPath(import.meta.url)) {
  const data = sparseTdmDataset();
  const here = path.dirname(fileURLToPath(import.meta.url));
  writeFileSync(path.join(here, 'tdm_sparse.csv'), writeCanonicalCsv(data));
  const levels = data.subjects.reduce((n, s) => n + s.observations.length, 0);
  const censored = data.subjects.reduce((n, s) => n + s.observations.filter((o) => o.censored).length, 0);
  const perSubject = [0, 0, 0, 0, 0];
  for (const s of data.subjects) perSubject[s.observations.length]++;
  console.log(`wrote tdm_sparse.csv: ${data.subjects.length} patients, ${levels} levels, ${censored} censored; patients with 1..4 levels: ${perSubject.slice(1).join(', ')}`);
}
