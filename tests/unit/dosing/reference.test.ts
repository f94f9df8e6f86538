/**
 * Dosing engine against outside references (each source named beside its check).
 */
import { readFileSync } from 'node:fs';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import { adviseDose } from '../../../engine/dosing/advise.js';
import { forecast } from '../../../engine/dosing/forecast.js';
import { buildSteadyStateEvaluator } from '../../../engine/dosing/metrics.js';
import { parsePatient } from '../../../engine/dosing/patient.js';
import { populationModelFromSpec } from '../../../engine/dosing/population.js';
import { buildLevelObjective, findMap, samplePosterior } from '../../../engine/dosing/posterior.js';
import { buildPatientPrior } from '../../../engine/dosing/prior.js';
import { cockcroftGault, scrUmolToMgDl } from '../../../engine/dosing/renal.js';
import { evaluateRegimen, evaluateRegimens } from '../../../engine/dosing/regimens.js';
import { parseTarget } from '../../../engine/dosing/targets.js';
import { getStructuralModel } from '../../../engine/models/catalogue.js';
import { createStreams, normalCdf } from '../../../engine/rng/index.js';
import { parseModelSpec } from '../../../engine/spec/modelSpec.js';

const REF = JSON.parse(readFileSync(path.resolve(__dirname, '../../../resources/validation/reference/dosing/map_posterior_scipy.json'), 'utf8'));

function setup(c: { model: unknown; patient: unknown }) {
  const population = populationModelFromSpec(parseModelSpec(c.model));
  const patient = parsePatient(c.patient);
  const model = getStructuralModel('1cmt');
  const cov = new Map(Object.entries(patient.covariates));
  const prior = buildPatientPrior(population, cov, model);
  const obj = buildLevelObjective(prior, patient.doses, patient.levels);
  return { population, patient, model, prior, obj };
}

describe('MAP estimate', () => {
  // Source: scipy.optimize.minimize (Nelder-Mead then BFGS) on the same objective with an
  // independent closed-form model, resources/validation/reference/dosing/map_posterior_scipy.py -> .json.
  for (const c of REF.patients) {
    it(`matches scipy.optimize within 0.1 % for patient ${c.patient.id} (${c.model.residual.model} error)`, () => {
      const { prior, obj } = setup(c);
      const map = findMap(obj, prior);
      expect(map.converged).toBe(true);
      const cl = prior.typical.CL * Math.exp(map.eta[0]);
      const v = prior.typical.V * Math.exp(map.eta[1]);
      expect(Math.abs(cl / c.map.CL - 1)).toBeLessThan(1e-3);
      expect(Math.abs(v / c.map.V - 1)).toBeLessThan(1e-3);
      // The objective itself (constants included) agrees at scipy's optimum.
      expect(obj.objective(Float64Array.from([c.map.etaCL, c.map.etaV]))).toBeCloseTo(c.map.objective, 8);
      expect(map.objective).toBeLessThanOrEqual(c.map.objective + 1e-7);
    });
  }
});

describe('MAP estimate, two-compartment model', () => {
  // Source: scipy.optimize.minimize on the same objective, the model solved by the matrix
  // exponential of the linear system (scipy.linalg.expm), resources/validation/reference/dosing/map_posterior_scipy.py.
  for (const c of REF.patients2cmt) {
    it(`matches scipy within 0.1 % for patient ${c.patient.id} (BSV on CL and V1 only)`, () => {
      const population = populationModelFromSpec(parseModelSpec(c.model));
      const patient = parsePatient(c.patient);
      const prior = buildPatientPrior(population, new Map(Object.entries(patient.covariates)), getStructuralModel('2cmt'));
      const obj = buildLevelObjective(prior, patient.doses, patient.levels);
      const map = findMap(obj, prior);
      expect(map.converged).toBe(true);
      expect(Math.abs((prior.typical.CL * Math.exp(map.eta[0])) / c.map.CL - 1)).toBeLessThan(1e-3);
      expect(Math.abs((prior.typical.V1 * Math.exp(map.eta[1])) / c.map.V1 - 1)).toBeLessThan(1e-3);
      expect(obj.objective(Float64Array.from([c.map.etaCL, c.map.etaV1]))).toBeCloseTo(c.map.objective, 6);
    });
  }
});

describe('posterior draws', () => {
  // Source: exact numerical integration of the same posterior on a 601 x 601 grid (numpy
  // trapezoid rule), resources/validation/reference/dosing/map_posterior_scipy.py -> .json (gridPosterior).
  it('mean and 5/95 % quantiles of CL and V agree with grid integration within Monte Carlo error', () => {
    const g = REF.gridPosterior;
    const { prior, obj } = setup(REF.patients[g.patientIndex]);
    const map = findMap(obj, prior);
    const draws = samplePosterior(obj, prior, map, createStreams(20261201).stream('ref'), { nDraws: 8000, chains: 4 });
    expect(Math.max(...draws.diagnostics.rhat)).toBeLessThan(1.05);
    ['CL', 'V'].forEach((name, i) => {
      const ess = draws.diagnostics.ess[i];
      const values = new Float64Array(draws.nDraws);
      for (let k = 0; k < draws.nDraws; k++) values[k] = prior.typical[name] * Math.exp(draws.eta[k * 2 + i]);
      const mean = values.reduce((a, b) => a + b, 0) / values.length;
      const sorted = values.slice().sort();
      const q = (p: number) => sorted[Math.floor((sorted.length - 1) * p)];
      const ref = g[name];
      // 4 Monte Carlo standard errors: sd / sqrt(ESS) for the mean, sqrt(p(1-p)/ESS) / density for a quantile.
      expect(Math.abs(mean - ref.mean)).toBeLessThan((4 * ref.sd) / Math.sqrt(ess));
      expect(Math.abs(q(0.05) - ref.q05)).toBeLessThan((4 * Math.sqrt(0.05 * 0.95 / ess)) / ref.densityAtQ05);
      expect(Math.abs(q(0.95) - ref.q95)).toBeLessThan((4 * Math.sqrt(0.05 * 0.95 / ess)) / ref.densityAtQ95);
    });
  });
});

describe('steady-state handbook equations', () => {
  // Source: one-compartment intermittent infusion at steady state, Sawchuk RJ, Zaske DE.
  // J Pharmacokinet Biopharm 1976;4:183-195 (from memory):
  //   Cmax,ss = k0 (1 - e^-kT) / (CL (1 - e^-k tau)),  Cmin,ss = Cmax,ss e^-k(tau - T);
  // AUC over one interval at steady state = dose / CL, so AUC24 = daily dose / CL.
  const model = getStructuralModel('1cmt');
  const cases = [
    { CL: 3.2, V: 55, dose: 1250, tau: 12, T: 1.5 },
    { CL: 1.1, V: 70, dose: 1000, tau: 24, T: 2 },
    { CL: 6.0, V: 20, dose: 400, tau: 8, T: 0.5 },
  ];
  for (const c of cases) {
    it(`trough, peak and AUC24 match to 1e-6 (CL ${c.CL}, V ${c.V}, ${c.dose} mg q${c.tau}h over ${c.T} h)`, () => {
      const k = c.CL / c.V;
      const k0 = c.dose / c.T;
      const cmax = (k0 * (1 - Math.exp(-k * c.T))) / (c.CL * (1 - Math.exp(-k * c.tau)));
      const cmin = cmax * Math.exp(-k * (c.tau - c.T));
      const auc24 = (c.dose * (24 / c.tau)) / c.CL;
      const params = Float64Array.from([c.CL, c.V, NaN, 0, 1]);
      const ev = buildSteadyStateEvaluator(model, { doseMg: c.dose, intervalH: c.tau, durationH: c.T, route: 'infusion' }, { peakDelayH: 0, thresholdMgL: NaN, gridIntervals: 32 });
      const out = new Float64Array(5);
      expect(ev.evaluate(params, out, 0)).toBe(true);
      expect(Math.abs(out[0] / auc24 - 1)).toBeLessThan(1e-6);
      expect(Math.abs(out[1] / cmin - 1)).toBeLessThan(1e-6);
      expect(Math.abs(out[2] / cmax - 1)).toBeLessThan(1e-6);
      // The same through the regimen table for a deterministic patient (every draw identical),
      // and through the unit-dose superposition path.
      const target = parseTarget({ id: 't', label: 't', source: 'test', goals: [{ metric: 'auc24', min: 0.99 * auc24, max: 1.01 * auc24 }], toxic: [{ metric: 'trough', max: cmin * 1.01 }] });
      const draws = new Float64Array(3 * 5);
      for (let d = 0; d < 3; d++) draws.set(params, d * 5);
      const input = { model, draws, nDraws: 3, target };
      const regimen = { doseMg: c.dose, intervalH: c.tau, durationH: c.T, route: 'infusion' as const };
      for (const r of [evaluateRegimen(input, regimen), evaluateRegimens(input, [regimen])[0]]) {
        expect(Math.abs(r.metrics.auc24!.median / auc24 - 1)).toBeLessThan(1e-3); // rounded to 4 digits for display
        expect(r.pTarget).toBe(1);
        expect(r.pToxic).toBe(0);
      }
      // Simpson's rule on the grid also reproduces dose / CL (the numerical path used for nonlinear models).
      const simpson = buildSteadyStateEvaluator({ ...model, analytic: false }, regimen, { peakDelayH: 0, thresholdMgL: NaN, gridIntervals: 64 });
      simpson.evaluate(params, out, 0);
      expect(Math.abs(out[0] / auc24 - 1)).toBeLessThan(1e-6);
    });
  }
});

describe('Cockcroft-Gault', () => {
  // Source: Cockcroft DW, Gault MH. Nephron 1976;16:31-41 (from memory):
  // CrCl = (140 - age) x weight / (72 x SCr mg/dL), x 0.85 for women.
  it('matches the published formula and hand-worked values', () => {
    // Hand-worked: (140 - 60) x 72 / (72 x 1.0) = 80 mL/min; woman: 0.85 x 80 = 68.
    expect(cockcroftGault({ ageY: 60, weightKg: 72, scrMgDl: 1.0, sex: 'M' })).toBeCloseTo(80, 12);
    expect(cockcroftGault({ ageY: 60, weightKg: 72, scrMgDl: 1.0, sex: 'F' })).toBeCloseTo(68, 12);
    // Hand-worked: (140 - 85) x 50 / (72 x 2.0) = 2750 / 144 = 19.097 mL/min.
    expect(cockcroftGault({ ageY: 85, weightKg: 50, scrMgDl: 2.0, sex: 'M' })).toBeCloseTo(19.0972222, 6);
    // 88.4 umol/L per mg/dL: 97 umol/L = 1.0973 mg/dL; (140-64) x 82 / (72 x 1.0973) = 78.88 mL/min.
    expect(scrUmolToMgDl(88.4)).toBeCloseTo(1, 12);
    expect(cockcroftGault({ ageY: 64, weightKg: 82, scrMgDl: scrUmolToMgDl(97), sex: 'M' })).toBeCloseTo((76 * 82 * 88.4) / (72 * 97), 10);
    const p = parsePatient({ id: 'x', covariates: { age_y: 64, weight_kg: 82, sex: 'F', scr_umol_L: 97 }, doses: [{ time_h: 0, amount_mg: 1, duration_h: 1 }] });
    expect(p.covariates.crcl_mL_min).toBeCloseTo((0.85 * 76 * 82 * 88.4) / (72 * 97), 10);
    expect(p.derived.crcl_mL_min).toContain('Cockcroft-Gault 1976');
  });
});

describe('probability of target attainment', () => {
  // Closed form: with no levels the draws are the prior, CL log-normal (log CL ~ N(mu, w^2)),
  // and AUC24 = daily dose / CL, so P(lo <= AUC24 <= hi) = Phi((ln(D/lo) - mu)/w) - Phi((ln(D/hi) - mu)/w)
  // (property of the log-normal distribution; common practice).
  it('equals the exact probability within Monte Carlo error', () => {
    const spec = parseModelSpec({
      name: 'PTA check (invented values)',
      source: 'invented for the check',
      structure: '1cmt',
      parameters: { CL: { typical: 4, bsv: 0.3 }, V: { typical: 50, bsv: 0.2 } },
      residual: { model: 'additive', a: 1 },
      covariateRanges: {},
    });
    const population = populationModelFromSpec(spec);
    const patient = parsePatient({ id: 'pta', covariates: {}, doses: [{ time_h: 0, amount_mg: 1000, duration_h: 1 }] });
    const target = parseTarget({ id: 'auc', label: 'AUC24', source: 'test', goals: [{ metric: 'auc24', min: 400, max: 600 }], toxic: [{ metric: 'auc24', max: 700 }] });
    const nDraws = 20000;
    const advice = adviseDose({ population, patient, target, caution: 'test caution', seed: 5, engineVersion: 'test', nDraws, evaluate: { doseMg: 1000, intervalH: 12, durationH: 1, route: 'infusion' }, overrideBlocks: true });
    const D = 2000;
    const mu = Math.log(4);
    const w = 0.3;
    const exact = normalCdf((Math.log(D / 400) - mu) / w) - normalCdf((Math.log(D / 600) - mu) / w);
    const exactToxic = normalCdf((Math.log(D / 700) - mu) / w);
    const r = advice.regimens[0];
    expect(advice.posterior.diagnostics.method).toBe('prior');
    expect(Math.abs(r.pTarget - exact)).toBeLessThan(4 * Math.sqrt((exact * (1 - exact)) / nDraws));
    expect(Math.abs((r.pToxic as number) - exactToxic)).toBeLessThan(4 * Math.sqrt((exactToxic * (1 - exactToxic)) / nDraws));
  });
});

describe('time above a threshold, sampling delay and time to fall below', () => {
  // Closed forms of the one-compartment model (Gibaldi & Perrier, Pharmacokinetics 2nd ed.
  // 1982, from memory): bolus at steady state C(t) = (D / V) e^-kt / (1 - e^-k tau), so the
  // level stays above X for t* = ln(C(0+) / X) / k; after one infusion of D over T,
  // C(T) = D / (CL T) (1 - e^-kT) and the level falls below X at T + ln(C(T) / X) / k.
  const model = getStructuralModel('1cmt');
  it('%T > threshold (bolus, steady state) within the grid interpolation error, and the delayed peak exactly', () => {
    const CL = 4;
    const V = 40;
    const k = CL / V;
    const D = 1000;
    const tau = 8;
    const thr = 25; // trough 20.4 mg/L < 25 < peak 45.4 mg/L
    const c0 = D / V / (1 - Math.exp(-k * tau));
    const ft = (100 * Math.log(c0 / thr)) / k / tau;
    const params = Float64Array.from([CL, V, NaN, 0, 1]);
    const ev = buildSteadyStateEvaluator(model, { doseMg: D, intervalH: tau, durationH: 0, route: 'bolus' }, { peakDelayH: 0.5, thresholdMgL: thr, gridIntervals: 64 });
    const out = new Float64Array(5);
    ev.evaluate(params, out, 0);
    expect(Math.abs(out[4] - ft)).toBeLessThan(0.05); // percentage points
    expect(Math.abs(out[2] / c0 - 1)).toBeLessThan(1e-6);
    expect(Math.abs(out[3] / (c0 * Math.exp(-k * 0.5)) - 1)).toBeLessThan(1e-6);
  });
  it('time to fall below a level after the last dose', () => {
    const spec = parseModelSpec({ name: 'no BSV (invented values)', source: 'test', structure: '1cmt', parameters: { CL: { typical: 2, bsv: null }, V: { typical: 30, bsv: null } }, residual: { model: 'additive', a: 1 }, covariateRanges: {} });
    const prior = buildPatientPrior(populationModelFromSpec(spec), new Map(), model);
    const k = 2 / 30;
    const cEnd = (1000 / (2 * 1)) * (1 - Math.exp(-k * 1));
    const expected = Math.log(cEnd / 5) / k;
    const fc = forecast({ prior, history: [{ timeH: 0, amountMg: 1000, route: 'infusion', durationH: 1 }], etaDraws: new Float64Array(0), nDraws: 10, startH: 48, belowMgL: 5 });
    expect(fc.timeBelow!.fromH).toBe(1);
    expect(Math.abs(fc.timeBelow!.hours.median - expected)).toBeLessThan(0.01);
  });
});
