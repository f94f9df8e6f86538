/**
 * Workloads shared by the benchmark suites: the Theoph data (R datasets::Theoph, exported by
 * resources/validation/reference/theoph/export_theoph.R) with its one-compartment oral spec, and an invented
 * sparse TDM design (12 one-hour infusions q12h, 2-4 levels at peaks, mid-interval or troughs,
 * weight and CrCl) whose levels are simulated from a two-compartment model.
 */
import { existsSync, readFileSync } from 'node:fs';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';
import { parseCanonicalCsv } from '../../engine/data/canonicalCsv.js';
import { createDataset, type SubjectInput } from '../../engine/data/dataset.js';
import type { Dataset, Dose } from '../../engine/data/types.js';
import { simulateDataset } from '../../engine/posthoc/simulateData.js';
import { createStreams } from '../../engine/rng/index.js';
import { parseModelSpec, type ModelSpec } from '../../engine/spec/modelSpec.js';

const here = path.dirname(fileURLToPath(import.meta.url));

/** A file of the repository, found from the source or the compiled (dist/) location. */
export function findRepoFile(rel: string): string {
  for (const up of ['..', '../..', '../../..']) {
    const p = path.resolve(here, up, rel);
    if (existsSync(p)) return p;
  }
  throw new Error(`cannot find ${rel}`);
}

export function theophDataset(): Dataset {
  return parseCanonicalCsv(readFileSync(findRepoFile('resources/validation/reference/theoph/theoph.csv'), 'utf8'));
}

/** Theoph: one compartment, first-order absorption, log-normal BSV on CL, V, ka, additive error. */
export const theophSpecJson = {
  structure: '1cmt',
  parameters: { CL: { typical: 0.05, bsv: 0.3 }, V: { typical: 0.5, bsv: 0.3 }, ka: { typical: 1.5, bsv: 0.3 } },
  residual: { model: 'additive', a: 1 },
};
export const theophSpec: ModelSpec = parseModelSpec(theophSpecJson);

/** The model the TDM levels are simulated from. */
export const tdmTruth: ModelSpec = parseModelSpec({
  structure: '2cmt',
  parameters: { CL: { typical: 4, bsv: 0.3 }, V1: { typical: 30, bsv: 0.25 }, Q: { typical: 6, bsv: null, fixed: true }, V2: { typical: 40, bsv: null, fixed: true } },
  covariates: [
    { parameter: 'CL', covariate: 'crcl_mL_min', relation: 'power', reference: 80, coefficient: 0.7 },
    { parameter: 'V1', covariate: 'weight_kg', relation: 'power', reference: 70, coefficient: 1, fixed: true },
  ],
  residual: { model: 'combined', a: 0.5, b: 0.1 },
});

/** The fitted spec: starting values away from the truth, 300 search + 200 averaging iterations. */
export const tdmFit: ModelSpec = parseModelSpec({
  structure: '2cmt',
  parameters: { CL: { typical: 3, bsv: 0.5 }, V1: { typical: 20, bsv: 0.5 }, Q: { typical: 6, bsv: null, fixed: true }, V2: { typical: 40, bsv: null, fixed: true } },
  covariates: [
    { parameter: 'CL', covariate: 'crcl_mL_min', relation: 'power', reference: 80, coefficient: 0.5 },
    { parameter: 'V1', covariate: 'weight_kg', relation: 'power', reference: 70, coefficient: 1, fixed: true },
  ],
  residual: { model: 'combined', a: 1, b: 0.2 },
  estimation: { searchMinIterations: 300, searchMaxIterations: 300, autoEndSearch: false, averagingIterations: 200 },
});

/** The invented TDM design for n patients (levels are placeholders). */
export function tdmDesign(n: number, seed: number): Dataset {
  const rng = createStreams(seed).stream('bench', 'tdm-design');
  const inputs: SubjectInput[] = [];
  for (let i = 0; i < n; i++) {
    const doses: Dose[] = Array.from({ length: 12 }, (_, k) => ({ timeH: 12 * k, amountMg: 1000, route: 'infusion' as const, durationH: 1 }));
    const nLevels = 2 + rng.int(3);
    const times = new Set<number>();
    while (times.size < nLevels) {
      const d = 2 + rng.int(10);
      const kind = rng.int(3);
      times.add(Math.round((12 * d + (kind === 0 ? 1.5 + rng.uniform() : kind === 1 ? 5 + 3 * rng.uniform() : 11.5 + 0.4 * rng.uniform())) * 100) / 100);
    }
    inputs.push({
      id: `P${i + 1}`,
      covariates: { weight_kg: Math.round(45 + 65 * rng.uniform()), crcl_mL_min: Math.round(20 + 120 * rng.uniform()) },
      doses,
      observations: [...times].sort((a, b) => a - b).map((t) => ({ timeH: t, valueMgL: 1, censored: false })),
    });
  }
  return createDataset(inputs, ['weight_kg', 'crcl_mL_min']);
}

/** The TDM design with levels simulated from `tdmTruth` (invented data). */
export function tdmDataset(n: number, seed: number): Dataset {
  return simulateDataset(tdmTruth, tdmDesign(n, seed), { seed: seed + 1 });
}
