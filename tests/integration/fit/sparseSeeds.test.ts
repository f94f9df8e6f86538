/**
 * Sparse TDM data, every seed lands on the exact maximum-likelihood estimate (issue: "the
 * estimator lands on the MLE on sparse TDM data, from every seed"). Two datasets, each fitted
 * once per seed (1-5) in beforeAll and reused by every assertion:
 * - nlme's Phenobarb (Grasela & Donn 1985; resources/validation/reference/phenobarb/phenobarb.csv, exported by
 *   export_phenobarb.R): 59 neonates, 1-6 levels each, repeated IV boluses, weight exponents on
 *   CL and V estimated, BSV on CL and V, additive error. Exact MLE by adaptive Gauss-Hermite
 *   quadrature: resources/validation/reference/phenobarb/exact_mle.py -> exact_mle.json.
 * - A SIMULATED sparse 2-compartment infusion design (invented data; make_dataset.ts): 120
 *   patients, 1-4 levels, some below the LLOQ, Q without BSV, V2 fixed, combined error. Exact MLE
 *   by the same quadrature: tests/reference/tdm-sparse/exact_mle.py -> exact_mle.json.
 * Each estimate within 0.5 of its exact SE (from the Hessian of the exact -2LL, in the same JSON)
 * of the exact value, and the importance-sampling -2LL within 1.0 of the exact -2LL.
 */
import { readFileSync } from 'node:fs';
import * as path from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { parseCanonicalCsv } from '../../../engine/data/canonicalCsv.js';
import { runPosthoc } from '../../../engine/posthoc/index.js';
import { runSaem, type SaemResult } from '../../../engine/saem/saem.js';
import type { ModelSpec } from '../../../engine/spec/modelSpec.js';
import { compileModel } from '../../../engine/stats/model.js';
import { phenobarbSpec, sparseTdmSpec } from '../../helpers/sparseSpecs.js';

const repo = path.resolve(__dirname, '../../..');
const SEEDS = [1, 2, 3, 4, 5];

interface Case {
  name: string;
  csv: string;
  json: string;
  spec: ModelSpec;
  /** trajectory column -> exact_mle.json key */
  keys: Record<string, string>;
}

const CASES: Case[] = [
  {
    name: "nlme's Phenobarb",
    csv: 'resources/validation/reference/phenobarb/phenobarb.csv',
    json: 'resources/validation/reference/phenobarb/exact_mle.json',
    spec: phenobarbSpec,
    keys: { CL: 'CL_L_per_h', V: 'V_L', 'CL~weight_kg': 'CL_weight_exponent', 'V~weight_kg': 'V_weight_exponent', bsv_CL: 'omega_CL', bsv_V: 'omega_V', residual_additive_mg_L: 'a_mg_L' },
  },
  {
    name: 'sparse 2-cmt TDM design (simulation)',
    csv: 'tests/reference/tdm-sparse/tdm_sparse.csv',
    json: 'tests/reference/tdm-sparse/exact_mle.json',
    spec: sparseTdmSpec,
    keys: { CL: 'CL_L_per_h', V1: 'V1_L', Q: 'Q_L_per_h', bsv_CL: 'omega_CL', bsv_V1: 'omega_V1', residual_additive_mg_L: 'a_mg_L', residual_proportional: 'b' },
  },
];

for (const c of CASES) {
  describe(`${c.name}: every seed lands on the exact MLE`, () => {
    const exact = JSON.parse(readFileSync(path.join(repo, c.json), 'utf8'));
    const exactMinus2LL: number = exact.quadratureConvergence['25'];
    const model = compileModel(c.spec, parseCanonicalCsv(readFileSync(path.join(repo, c.csv), 'utf8')));
    const fits: { seed: number; result: SaemResult; minus2LL: number }[] = [];
    beforeAll(async () => {
      for (const seed of SEEDS) {
        const result = await runSaem(model, { seed });
        const post = runPosthoc(model, result.theta, { seed, diagnostics: false, linearisedSe: false });
        fits.push({ seed, result, minus2LL: post.likelihood.importance?.minus2LL ?? NaN });
      }
      for (const f of fits)
        console.log(`${c.name} seed ${f.seed}: ${Object.keys(c.keys).map((k) => `${k} ${f.result.estimates[f.result.estimateNames.indexOf(k)].toPrecision(4)}`).join(', ')}; -2LL ${f.minus2LL.toFixed(2)} (exact ${exactMinus2LL.toFixed(2)})`);
    }, 600_000);

    it('quadrature reference converged (exact_mle.json: 21 and 25 nodes per dimension agree to 0.01)', () => {
      expect(Math.abs(exact.quadratureConvergence['21'] - exact.quadratureConvergence['25'])).toBeLessThan(0.01);
    });
    it('each estimate within 0.5 exact SE of the exact MLE, every seed (exact_mle.json)', () => {
      const misses: string[] = [];
      for (const f of fits)
        for (const [column, key] of Object.entries(c.keys)) {
          const q = f.result.estimateNames.indexOf(column);
          expect(q, `column ${column}`).toBeGreaterThanOrEqual(0);
          const z = (f.result.estimates[q] - exact.estimates[key]) / exact.standardErrors.reportedScale[key];
          if (!(Math.abs(z) <= 0.5)) misses.push(`seed ${f.seed} ${column}: ${f.result.estimates[q].toPrecision(4)} vs ${exact.estimates[key].toPrecision(4)} (${z.toFixed(2)} SE)`);
        }
      expect(misses).toEqual([]);
    });
    it('importance-sampling -2LL within 1.0 of the exact -2LL, every seed (exact_mle.json, 25 nodes)', () => {
      for (const f of fits) expect(Math.abs(f.minus2LL - exactMinus2LL), `seed ${f.seed}: ${f.minus2LL}`).toBeLessThan(1);
    });
  });
}
