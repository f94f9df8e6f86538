/**
 * The model specs of the sparse-data checks (tests/integration/fit/sparseSeeds.test.ts) and the
 * sparse benchmark: nlme's Phenobarb (resources/validation/reference/phenobarb) and the simulated sparse 2-cmt
 * TDM design (tests/reference/tdm-sparse), matching the models of their exact_mle.py scripts.
 */
import { readFileSync } from 'node:fs';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';
import { parseCanonicalCsv } from '../../engine/data/canonicalCsv.js';
import type { Dataset } from '../../engine/data/types.js';
import { parseModelSpec, type ModelSpec } from '../../engine/spec/modelSpec.js';

export const phenobarbSpec: ModelSpec = parseModelSpec({
  name: 'Phenobarb 1cmt IV, weight exponents',
  structure: '1cmt',
  parameters: { CL: { typical: 0.006, bsv: 0.3 }, V: { typical: 1.3, bsv: 0.3 } },
  covariates: [
    { parameter: 'CL', covariate: 'weight_kg', relation: 'power', reference: 1.3, coefficient: 1 },
    { parameter: 'V', covariate: 'weight_kg', relation: 'power', reference: 1.3, coefficient: 1 },
  ],
  residual: { model: 'additive', a: 3 },
});

/** The sparse design's model as JSON (what a worker job or `plateau fit --model` gets). */
export const sparseTdmSpecJson = {
  name: 'sparse TDM 2cmt infusion (simulation)',
  structure: '2cmt',
  parameters: { CL: { typical: 3, bsv: 0.5 }, V1: { typical: 20, bsv: 0.5 }, Q: { typical: 4, bsv: null }, V2: { typical: 40, bsv: null, fixed: true } },
  covariates: [
    { parameter: 'CL', covariate: 'crcl_mL_min', relation: 'power', reference: 80, coefficient: 0.7, fixed: true },
    { parameter: 'V1', covariate: 'weight_kg', relation: 'power', reference: 70, coefficient: 1, fixed: true },
  ],
  residual: { model: 'combined', a: 1, b: 0.2 },
};
export const sparseTdmSpec: ModelSpec = parseModelSpec(sparseTdmSpecJson);


/** A dataset of tests/reference (found from the source or the compiled dist/ location). */
export function referenceDataset(rel: string): Dataset {
  const here = path.dirname(fileURLToPath(import.meta.url));
  for (const up of ['../reference', '../../../tests/reference']) {
    try {
      return parseCanonicalCsv(readFileSync(path.resolve(here, up, rel), 'utf8'));
    } catch {
      // try the next location
    }
  }
  throw new Error(`cannot find tests/reference/${rel}`);
}
