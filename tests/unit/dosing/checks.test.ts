/**
 * Checks that must fire before dose advice is used: a fit unfit to be a prior, levels the model
 * cannot explain, absorption parameters against the dose routes, and input messages.
 * All models and patients here are invented for the tests.
 */
import { describe, expect, it } from 'vitest';
import { adviseDose, AdviceError } from '../../../engine/dosing/advise.js';
import { parsePatient, PatientError } from '../../../engine/dosing/patient.js';
import { loadPopulationModel, populationModelFromSpec, PopulationModelError } from '../../../engine/dosing/population.js';
import { parseModelSpec } from '../../../engine/spec/modelSpec.js';
import { seedAgreement } from '../../../engine/posthoc/seedAgreement.js';

const SPEC = {
  name: 'checks-test model (invented values)',
  structure: '1cmt',
  parameters: { CL: { typical: 3.5, bsv: 0.35 }, V: { typical: 50, bsv: 0.25 } },
  covariates: [],
  residual: { model: 'combined', a: 1, b: 0.15 },
};
const POPULATION = [
  { parameter: 'CL', kind: 'typical', estimate: 4.2, fixed: false, se: 0.3, rsePercent: 7 },
  { parameter: 'V', kind: 'typical', estimate: 61, fixed: false, se: 4, rsePercent: 7 },
  { parameter: 'CL', kind: 'bsv', estimate: 0.22, fixed: false, se: 0.04, rsePercent: 18 },
  { parameter: 'V', kind: 'bsv', estimate: 0.18, fixed: false, se: 0.05, rsePercent: 28 },
  { parameter: 'a', kind: 'residual', estimate: 0.7, fixed: false, se: 0.2, rsePercent: 29 },
  { parameter: 'b', kind: 'residual', estimate: 0.11, fixed: false, se: 0.02, rsePercent: 18 },
];
/** A sound fit.json (the fields the estimator and the post-fit step write). */
const FIT = {
  format: 'plateau-fit',
  engineVersion: '0.1.0',
  seed: 3,
  dataHash: 'sha256:abc',
  spec: SPEC,
  covariateRanges: { weight_kg: [40, 130] },
  population: POPULATION,
  individual: [],
  trajectory: { names: [], searchEnd: 300, searchSettled: true, iterations: 500, values: [] },
  uncertainty: { method: 'observed Fisher information', labels: [], correlation: null, conditionNumber: 40, ok: true, secondMethod: null },
  likelihood: { minus2LL: 812.4 },
  timing: {},
  warnings: [] as string[],
};
const PATIENT = {
  id: 'c1',
  covariates: { weight_kg: 80 },
  doses: [0, 12, 24].map((t) => ({ time_h: t, amount_mg: 1000, duration_h: 1, route: 'iv' })),
  levels: [{ time_h: 23.5, conc_mg_L: 12 }, { time_h: 26, conc_mg_L: 28 }],
};

function advise(population: ReturnType<typeof loadPopulationModel>, patient: object = PATIENT) {
  return adviseDose({ population, patient: parsePatient(patient), caution: 'CAUTION (test)', seed: 5, engineVersion: 'test', nDraws: 1000 });
}
const codes = (a: ReturnType<typeof advise>) => a.warnings.map((w) => `${w.severity}:${w.code}`);

describe('a fit unfit to be a prior', () => {
  it('a sound fit raises none of the fit checks', () => {
    const a = advise(loadPopulationModel(FIT));
    expect(codes(a).filter((c) => c.includes(':fit-'))).toEqual([]);
  });

  it('search cap reached, no SEs and a collapsed BSV are flagged by name; each fit warning is listed with its text', () => {
    const fit = {
      ...FIT,
      population: POPULATION.map((e) => (e.kind === 'bsv' && e.parameter === 'V' ? { ...e, estimate: 0.002, se: null, rsePercent: null } : { ...e, se: null, rsePercent: null })),
      trajectory: { ...FIT.trajectory, searchEnd: 1000, searchSettled: false },
      uncertainty: { ...FIT.uncertainty, ok: false, conditionNumber: 3e9 },
      warnings: ['search reached its cap of 1000 iterations without settling', 'the Fisher information is not positive definite', 'omega of V is near zero'],
    };
    const a = advise(loadPopulationModel(fit));
    expect(a.status).toBe('advice');
    const by = (code: string) => a.warnings.filter((w) => w.code === code);
    expect(by('fit-cap-reached')).toHaveLength(1);
    expect(by('fit-cap-reached')[0]).toMatchObject({ severity: 'flag' });
    expect(by('fit-cap-reached')[0].message).toContain('1000 iterations');
    expect(by('fit-no-se')[0].severity).toBe('flag');
    expect(by('fit-no-se')[0].message).toContain('standard errors could not be computed');
    expect(by('fit-bsv-collapsed')[0].message).toMatch(/BSV of V collapsed to 0\.002/);
    // Every fit warning appears with its own text, not as a count.
    for (const w of fit.warnings) expect(a.warnings.some((x) => x.code === 'fit-warning' && x.message.includes(w))).toBe(true);
    expect(a.warnings.some((w) => /reported \d+ warning/.test(w.message))).toBe(false);
  });

  it('a fit without an uncertainty section, or with missing SEs, is flagged', () => {
    const { uncertainty: _u, ...noUnc } = FIT;
    expect(codes(advise(loadPopulationModel(noUnc)))).toContain('flag:fit-no-se');
    const missing = { ...FIT, population: POPULATION.map((e) => (e.parameter === 'V' && e.kind === 'typical' ? { ...e, se: null } : e)) };
    const w = advise(loadPopulationModel(missing)).warnings.find((x) => x.code === 'fit-no-se')!;
    expect(w.message).toContain('typical V');
  });

  it('a fit whose seeds disagreed is flagged with the verdict (the warning main/services/fitSeeds.ts writes)', () => {
    const run = (seed: number, estimates: number[], minus2LL: number) => ({ seed, estimates, minus2LL, mcError: 0.1, usableAsPrior: true });
    const agreement = seedAgreement(['CL', 'BSV V1'], [run(1, [4.0, 0.25], 1635.3), run(2, [4.0, 0.036], 1648.8), run(3, [4.0, 0.24], 1635.4)], [0.1, 0.049]);
    expect(agreement.agree).toBe(false);
    const a = advise(loadPopulationModel({ ...FIT, warnings: [`seeds: ${agreement.verdict}`] }));
    expect(a.warnings.find((w) => w.code === 'fit-warning' && w.message.includes(agreement.verdict))).toMatchObject({ severity: 'flag' });
  });

  it('a fit whose record says "do not use" blocks', () => {
    const a = advise(loadPopulationModel({ ...FIT, warnings: ['estimate bsv V is not finite: do not use this fit'] }));
    expect(a.status).toBe('blocked');
    expect(a.warnings[0]).toMatchObject({ severity: 'block', code: 'fit-unusable' });
    expect(a.regimens).toEqual([]);
  });

  it('a non-finite estimate (null in JSON) is an error that names the entry', () => {
    const bad = { ...FIT, population: POPULATION.map((e) => (e.kind === 'typical' && e.parameter === 'CL' ? { ...e, estimate: null } : e)) };
    expect(() => loadPopulationModel(bad)).toThrow(PopulationModelError);
    expect(() => loadPopulationModel(bad)).toThrow(/population\[0\]: the estimate of typical CL is not finite/);
  });
});

describe('level consistency', () => {
  // The audit's case: IV patient, levels 10 and 12 mg/L, a prior with an enormous CL and a
  // near-zero BSV, so the MAP prediction is about 0 and the posterior cannot move.
  const hugeCl = populationModelFromSpec(
    parseModelSpec({
      name: 'enormous CL, collapsed BSV (invented)',
      source: 'invented for the consistency test',
      structure: '1cmt',
      parameters: { CL: { typical: 161, bsv: 0.0003 }, V: { typical: 20, bsv: 0.0003 } },
      covariates: [],
      residual: { model: 'proportional', b: 0.15 },
      covariateRanges: {},
    }),
  );
  const ivPatient = {
    id: 'audit',
    covariates: {},
    doses: [0, 12].map((t) => ({ time_h: t, amount_mg: 1000, duration_h: 1, route: 'iv' })),
    levels: [{ time_h: 11.5, conc_mg_L: 10 }, { time_h: 23.5, conc_mg_L: 12 }],
  };

  it('blocks when the MAP prediction is near 0 against 10 and 12 mg/L', () => {
    const a = advise(hugeCl, ivPatient);
    expect(a.posterior.levels[0].predictedMap).toBeLessThan(0.1);
    expect(a.status).toBe('blocked');
    const blocks = a.warnings.filter((w) => w.code === 'level-inconsistent' && w.severity === 'block');
    expect(blocks).toHaveLength(2);
    expect(blocks[0].message).toContain('|IWRES| > 4');
    expect(blocks[0].message).toContain('posterior predictive P');
    for (const l of a.posterior.levels) {
      expect(l.posteriorPredictiveP).toBeGreaterThan(0.999);
      expect(l.iwres === null || Math.abs(l.iwres) > 4).toBe(true);
    }
  });

  it('blocks the same case under additive, combined and log-additive residual errors', () => {
    for (const residual of [{ model: 'additive', a: 5 }, { model: 'combined', a: 1, b: 0.15 }, { model: 'log-additive', a: 0.2 }]) {
      const m = populationModelFromSpec(parseModelSpec({ ...hugeCl.spec, residual }));
      const a = advise(m, ivPatient);
      // Additive SD 5 mg/L: the levels are only 2 SD from 0, but the ten-fold gap rule blocks.
      expect(a.warnings.filter((w) => w.code === 'level-inconsistent' && w.severity === 'block').length, residual.model).toBe(2);
    }
  });

  it('the same levels with a proper BSV are explained, not blocked', () => {
    const ok = populationModelFromSpec(parseModelSpec({ ...SPEC, source: 'invented', covariateRanges: {} }));
    const a = advise(ok, ivPatient);
    expect(a.warnings.filter((w) => w.code.startsWith('level-'))).toEqual([]);
    for (const l of a.posterior.levels) {
      expect(l.posteriorPredictiveP).toBeGreaterThan(0.01);
      expect(l.posteriorPredictiveP).toBeLessThan(0.99);
      expect(Math.abs(l.iwres!)).toBeLessThan(3);
    }
  });

  it('flags levels that are moderately inconsistent, without blocking', () => {
    // Little BSV on CL and V (0.05): levels about 1.3 times the typical curve lie in the tails
    // (predictive tail P between 0.001 and 0.01, IWRES about 2), but not far outside.
    const tight = populationModelFromSpec(parseModelSpec({ ...SPEC, source: 'invented', parameters: { CL: { typical: 3.5, bsv: 0.05 }, V: { typical: 50, bsv: 0.05 } }, residual: { model: 'proportional', b: 0.15 }, covariateRanges: {} }));
    const p = { ...ivPatient, levels: [{ time_h: 2, conc_mg_L: 25 }, { time_h: 11.5, conc_mg_L: 13 }] };
    const a = advise(tight, p);
    const lv = a.warnings.filter((w) => w.code.startsWith('level-'));
    expect(lv.some((w) => w.severity === 'flag' && w.code === 'level-unusual')).toBe(true);
    expect(lv.every((w) => w.severity !== 'block')).toBe(true);
  });
});

describe('absorption parameters against the dose routes', () => {
  const oralModel = populationModelFromSpec(
    parseModelSpec({ name: 'oral model (invented)', source: 'invented', structure: '1cmt', parameters: { CL: { typical: 4, bsv: 0.3 }, V: { typical: 40, bsv: 0.2 }, ka: { typical: 1.2, bsv: 0.3 } }, residual: { model: 'combined', a: 0.2, b: 0.1 }, covariateRanges: {} }),
  );
  it('a model with ka for a patient with IV doses only: a note, and the advice runs', () => {
    const a = advise(oralModel);
    const w = a.warnings.find((x) => x.code === 'absorption-unused')!;
    expect(w.severity).toBe('note');
    expect(w.message).toContain('ka unused for IV doses');
    expect(a.regimens.length).toBeGreaterThan(0);
  });
  it('an IV model for oral doses: an error saying the model cannot describe them', () => {
    const iv = populationModelFromSpec(parseModelSpec({ ...SPEC, source: 'invented', covariateRanges: {} }));
    const po = { ...PATIENT, doses: [0, 12].map((t) => ({ time_h: t, amount_mg: 300, route: 'oral' })), levels: [{ time_h: 14, conc_mg_L: 5 }] };
    expect(() => advise(iv, po)).toThrow(AdviceError);
    expect(() => advise(iv, po)).toThrow(/cannot describe oral doses/);
  });
});

describe('input messages', () => {
  it('a level "NaN" is reported as not a number, an absent level as missing', () => {
    const withLevel = (l: object) => () => parsePatient({ ...PATIENT, levels: [{ time_h: 23.5, ...l }] });
    expect(withLevel({ conc_mg_L: 'NaN' })).toThrow(PatientError);
    expect(withLevel({ conc_mg_L: 'NaN' })).toThrow(/levels\[0\]\.conc_mg_L: must be a number, got "NaN" \(not a number\)/);
    expect(withLevel({})).toThrow(/levels\[0\]\.conc_mg_L: the measured level \(mg\/L\) is missing/);
  });
  it('a model spec without covariateRanges gives one flag, not two', () => {
    const a = advise(populationModelFromSpec(parseModelSpec({ ...SPEC, source: 'invented' })));
    const about = a.warnings.filter((w) => /covariate ?ranges/i.test(w.message));
    expect(about).toHaveLength(1);
    expect(about[0]).toMatchObject({ severity: 'flag', code: 'ranges-unknown' });
  });
});
