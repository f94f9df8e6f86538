/**
 * Post-fit steps on Theoph (R datasets::Theoph; Boeckmann, Sheiner & Beal 1994), one-compartment
 * oral model, log-normal diagonal BSV on CL, V, ka, additive error, against
 * - the exact marginal -2LL by adaptive Gauss-Hermite quadrature and the SEs from the numerical
 *   Hessian of that exact likelihood (resources/validation/reference/theoph/exact_mle.py -> exact_mle.json),
 * - nlme's ML fit of the same model (resources/validation/reference/theoph/nlme_fit.R -> nlme_fit.json;
 *   Pinheiro & Bates 2000, section 8.2). nlme's logLik is a first-order conditional
 *   linearisation, an approximation of the marginal likelihood, so it is compared with our
 *   linearised -2LL, not with the exact one.
 */
import { readFileSync } from 'node:fs';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import { parseCanonicalCsv } from '../../../engine/data/canonicalCsv.js';
import { mergePosthoc, posthocRecordFields, runPosthoc } from '../../../engine/posthoc/index.js';
import { buildDensity } from '../../../engine/posthoc/density.js';
import { conditionalModes } from '../../../engine/posthoc/modes.js';
import { buildLinearisation, linearisedMinus2LL } from '../../../engine/posthoc/linearised.js';
import { buildFitRecord } from '../../../engine/saem/fitRecord.js';
import { runSaem } from '../../../engine/saem/saem.js';
import { parseModelSpec } from '../../../engine/spec/modelSpec.js';
import { compileModel, type PopulationParameters } from '../../../engine/stats/model.js';

const ref = path.resolve(__dirname, '../../../resources/validation/reference/theoph');
const exact = JSON.parse(readFileSync(path.join(ref, 'exact_mle.json'), 'utf8'));
const nlmeReference = JSON.parse(readFileSync(path.join(ref, 'nlme_fit.json'), 'utf8')).reference;
const dataset = parseCanonicalCsv(readFileSync(path.join(ref, 'theoph.csv'), 'utf8'));
const spec = parseModelSpec({
  name: 'Theoph 1cmt oral',
  structure: '1cmt',
  parameters: { CL: { typical: 0.05, bsv: 0.3 }, V: { typical: 0.5, bsv: 0.3 }, ka: { typical: 1.5, bsv: 0.3 } },
  residual: { model: 'additive', a: 1 },
});
const model = compileModel(spec, dataset);

const diag = (sd: number[]) => Float64Array.from([sd[0] ** 2, 0, 0, 0, sd[1] ** 2, 0, 0, 0, sd[2] ** 2]);
// exact_mle.json theta: log CL, log V, log ka, log omega_CL, log omega_V, log omega_ka, log a.
const t = exact.theta as number[];
const thetaExact: PopulationParameters = { mu: Float64Array.from(t.slice(0, 3)), beta: new Float64Array(0), omega: diag(t.slice(3, 6).map(Math.exp)), a: Math.exp(t[6]), b: 0 };
const fe = nlmeReference.fixedEffects;
const re = nlmeReference.randomEffectSD;
const thetaNlme: PopulationParameters = { mu: Float64Array.from([fe.lCl, fe.lV, fe.lKa]), beta: new Float64Array(0), omega: diag([re.lCl, re.lV, re.lKa]), a: nlmeReference.residualSD, b: 0 };
const refSe = exact.standardErrors.naturalScale;
const refSeList = [refSe.CL_L_per_h_per_kg, refSe.V_L_per_kg, refSe.ka_per_h, refSe.omega_CL, refSe.omega_V, refSe.omega_ka, refSe.a_mg_L];
const rel = (x: number, y: number) => Math.abs(x / y - 1);

describe('Theoph: post-fit steps at the exact MLE (isolates their accuracy)', () => {
  const r = runPosthoc(model, thetaExact, { seed: 11, diagnostics: false });

  it('importance-sampling -2LL within 0.5 of the exact -2LL (exact_mle.json, adaptive Gauss-Hermite quadrature)', () => {
    const is = r.likelihood.importance!;
    expect(Math.abs(is.minus2LL - exact.minus2LL)).toBeLessThan(0.5);
    // Our Monte Carlo error is honest: the difference is within 4 of its SEs.
    expect(Math.abs(is.minus2LL - exact.minus2LL)).toBeLessThan(4 * is.mcError + 0.02);
    expect(is.mcError).toBeGreaterThan(0);
    for (let i = 0; i < 12; i++) expect(Math.abs(is.logLik[i] - exact.perSubject[i].logMarginal)).toBeLessThan(0.05);
  });
  it('Laplace -2LL matches the 1-node quadrature of exact_mle.json (the same approximation)', () => {
    expect(Math.abs(r.likelihood.laplaceMinus2LL - exact.quadratureConvergence[0].minus2LL)).toBeLessThan(1e-3);
  });
  it('conditional modes match exact_mle.json perSubject etaMode', () => {
    for (let i = 0; i < 12; i++) for (let k = 0; k < 3; k++) expect(Math.abs(r.modes.eta[i * 3 + k] - exact.perSubject[i].etaMode[k])).toBeLessThan(1e-4);
  });
  it("SEs by Louis' formula within 20 % of the exact-Hessian SEs (exact_mle.json standardErrors.naturalScale)", () => {
    expect(r.standardErrors.method).toBe('stochastic approximation (Louis)');
    expect(r.standardErrors.ok).toBe(true);
    refSeList.forEach((s, q) => expect(rel(r.standardErrors.se[q]!, s), r.layout.entries[q].label).toBeLessThan(0.2));
  });
  it('SEs by linearisation within 20 % of the exact-Hessian SEs (exact_mle.json)', () => {
    const sl = r.standardErrorsLinearised!;
    expect(sl.ok).toBe(true);
    refSeList.forEach((s, q) => expect(rel(sl.se[q]!, s), r.layout.entries[q].label).toBeLessThan(0.2));
  });
  it('correlation matrix and condition number are reported (exact_mle.json hessianEigenvalues: well conditioned)', () => {
    const c = r.standardErrors.correlation!;
    expect(c).toHaveLength(7);
    for (let a = 0; a < 7; a++) expect(c[a][a]).toBeCloseTo(1, 12);
    expect(Math.abs(c[0][1] - exact.correlationOptimiserScale[0][1])).toBeLessThan(0.15);
    expect(r.standardErrors.conditionNumber!).toBeGreaterThan(1);
    expect(r.standardErrors.conditionNumber!).toBeLessThan(1e3);
  });
});

describe('Theoph: at the nlme estimate', () => {
  it('importance-sampling -2LL within 0.5 of the exact -2LL there (exact_mle.json minus2LLAtNlmeEstimate)', () => {
    const r = runPosthoc(model, thetaNlme, { seed: 12, diagnostics: false, linearisedSe: false });
    expect(Math.abs(r.likelihood.importance!.minus2LL - exact.minus2LLAtNlmeEstimate)).toBeLessThan(0.5);
  });
  it("linearised -2LL close to nlme's own linearised -2LL (nlme_fit.json reference.minus2LL; both first-order conditional approximations)", () => {
    const density = buildDensity(model, thetaNlme)!;
    const lin = buildLinearisation(model, conditionalModes(density));
    expect(Math.abs(linearisedMinus2LL(lin, thetaNlme) - nlmeReference.minus2LL)).toBeLessThan(0.5);
    // Both differ from the exact value by about 1.3 (exact_mle.json minus2LLAtNlmeEstimate).
    expect(exact.minus2LLAtNlmeEstimate - nlmeReference.minus2LL).toBeGreaterThan(1);
  });
});

describe('Theoph: SAEM fit, then the post-fit steps written into the fit record', async () => {
  const fit = await runSaem(model, { seed: 20260101 });
  const record = buildFitRecord(model, fit, 'test');
  const r = runPosthoc(model, fit.theta, { seed: 3, startPhi: fit.individualPhiMean });
  const merged = mergePosthoc(record, posthocRecordFields(model, r, 3));

  it('-2LL at the SAEM estimate within 0.5 of the exact maximum -2LL (exact_mle.json)', () => {
    expect(Math.abs(merged.likelihood.minus2LL! - exact.minus2LL)).toBeLessThan(0.5);
  });
  it('SEs at the SAEM estimate within 20 % of the exact-Hessian SEs (exact_mle.json)', () => {
    merged.population.forEach((e, q) => expect(rel(e.se!, refSeList[q]), `${e.kind} ${e.parameter}`).toBeLessThan(0.2));
  });
  it('AIC and BIC follow from -2LL with 7 parameters (AIC, BIC definitions; exact_mle.json uses the same)', () => {
    const l = merged.likelihood;
    expect(l.aic! - l.minus2LL!).toBeCloseTo(14, 10);
    expect(l.bic! - l.minus2LL!).toBeCloseTo(7 * Math.log(12), 10);
    expect(exact.BIC_subjects - exact.minus2LL).toBeCloseTo(7 * Math.log(12), 8);
    // BICc: 6 random-effect-related parameters with log N, the residual SD with log n_obs.
    expect(l.bicc! - l.minus2LL!).toBeCloseTo(6 * Math.log(12) + Math.log(132), 10);
    expect(l.linearised.minus2LL).not.toBeNull();
  });
  it('the record carries per-subject modes, means, SDs, shrinkage and draws, and diagnostics for every level', () => {
    expect(merged.individual).toHaveLength(12);
    for (const s of merged.individual) {
      for (const n of ['CL', 'V', 'ka']) {
        expect(s.mode[n]).toBeGreaterThan(0);
        expect(s.mean[n]).toBeGreaterThan(0);
        expect(s.sd[n]).toBeGreaterThan(0);
        expect(s.shrinkage[n]).toBeGreaterThan(0);
        expect(s.draws[n].length).toBeGreaterThanOrEqual(25);
      }
    }
    const obs = merged.diagnostics!.observations;
    expect(obs).toHaveLength(132);
    for (const o of obs) for (const v of [o.pred, o.ipred, o.iwres, o.npde]) expect(Number.isFinite(v)).toBe(true);
    expect(merged.diagnostics!.vpc.bins.length).toBeGreaterThanOrEqual(5);
    expect(merged.diagnostics!.pcVpc.predictionCorrected).toBe(true);
    expect(JSON.stringify(merged)).not.toMatch(/NaN|Infinity/);
  });
});
