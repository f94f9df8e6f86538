/**
 * Theoph (R datasets::Theoph; Boeckmann, Sheiner & Beal), one-compartment oral model, log-normal
 * diagonal BSV on CL, V, ka, additive error: SAEM against the exact maximum-likelihood estimate
 * by adaptive Gauss-Hermite quadrature (resources/validation/reference/theoph/exact_mle.py -> exact_mle.json)
 * and against the nlme ML fit of the same model (resources/validation/reference/theoph/nlme_fit.R -> nlme_fit.json;
 * Pinheiro & Bates 2000, section 8.2).
 */
import { readFileSync } from 'node:fs';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import { parseCanonicalCsv } from '../../../engine/data/canonicalCsv.js';
import { buildFitRecord } from '../../../engine/saem/fitRecord.js';
import { runSaem } from '../../../engine/saem/saem.js';
import { parseModelSpec } from '../../../engine/spec/modelSpec.js';
import { compileModel } from '../../../engine/stats/model.js';

const ref = path.resolve(__dirname, '../../../resources/validation/reference/theoph');
const exact = JSON.parse(readFileSync(path.join(ref, 'exact_mle.json'), 'utf8'));
const nlmeReference = JSON.parse(readFileSync(path.join(ref, 'nlme_fit.json'), 'utf8')).reference;
const dataset = parseCanonicalCsv(readFileSync(path.join(ref, 'theoph.csv'), 'utf8'));

export const theophSpec = parseModelSpec({
  name: 'Theoph 1cmt oral',
  structure: '1cmt',
  parameters: { CL: { typical: 0.05, bsv: 0.3 }, V: { typical: 0.5, bsv: 0.3 }, ka: { typical: 1.5, bsv: 0.3 } },
  residual: { model: 'additive', a: 1 },
});

const rel = (x: number, y: number) => Math.abs(x / y - 1);

describe('Theoph: SAEM lands on the exact MLE', async () => {
  const model = compileModel(theophSpec, dataset);
  const result = await runSaem(model, { seed: 20260101 });
  const record = buildFitRecord(model, result, 'test');
  const est = (kind: string, parameter: string) => record.population.find((e) => e.kind === kind && e.parameter === parameter)!.estimate;

  it('typical values within 2 % of the exact MLE (exact_mle.json, adaptive Gauss-Hermite quadrature)', () => {
    expect(rel(est('typical', 'CL'), exact.estimates.CL_L_per_h_per_kg)).toBeLessThan(0.02);
    expect(rel(est('typical', 'V'), exact.estimates.V_L_per_kg)).toBeLessThan(0.02);
    expect(rel(est('typical', 'ka'), exact.estimates.ka_per_h)).toBeLessThan(0.02);
  });
  it('BSV SDs within 10 % and the residual SD within 5 % of the exact MLE (exact_mle.json)', () => {
    expect(rel(est('bsv', 'CL'), exact.estimates.omega_CL)).toBeLessThan(0.1);
    expect(rel(est('bsv', 'V'), exact.estimates.omega_V)).toBeLessThan(0.1);
    expect(rel(est('bsv', 'ka'), exact.estimates.omega_ka)).toBeLessThan(0.1);
    expect(rel(est('residual', 'a'), exact.estimates.a_mg_L)).toBeLessThan(0.05);
  });
  it('is close to the nlme ML fit of the same model (nlme_fit.json "reference"; nlme linearises, so looser)', () => {
    expect(rel(est('typical', 'CL'), nlmeReference.naturalScale.CL_L_per_h_per_kg)).toBeLessThan(0.03);
    expect(rel(est('typical', 'V'), nlmeReference.naturalScale.V_L_per_kg)).toBeLessThan(0.03);
    expect(rel(est('typical', 'ka'), nlmeReference.naturalScale.ka_per_h)).toBeLessThan(0.03);
    for (const [p, key] of [['CL', 'lCl'], ['V', 'lV'], ['ka', 'lKa']] as const) expect(rel(est('bsv', p), nlmeReference.randomEffectSD[key])).toBeLessThan(0.12);
    expect(rel(est('residual', 'a'), nlmeReference.residualSD)).toBeLessThan(0.05);
  });
  it('reports the record fields, chains and phases', () => {
    expect(record.chainsPerSubject).toBe(5); // ceil(50 / 12)
    expect(record.trajectory.searchEnd).toBeGreaterThanOrEqual(150);
    expect(record.trajectory.iterations).toBe(record.trajectory.searchEnd + 200);
    expect(record.individual).toHaveLength(12);
    for (const s of record.individual) for (const v of Object.values(s.parameters)) expect(Number.isFinite(v)).toBe(true);
    expect(record.population.map((e) => e.kind)).toEqual(['typical', 'typical', 'typical', 'bsv', 'bsv', 'bsv', 'residual']);
  });
});
