import { readdirSync, readFileSync } from 'node:fs';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import { adviseDose, type AdviceOptions } from '../../../engine/dosing/advise.js';
import { parsePatient } from '../../../engine/dosing/patient.js';
import { loadPopulationModel, populationModelFromSpec, PopulationModelError } from '../../../engine/dosing/population.js';
import { PriorError } from '../../../engine/dosing/prior.js';
import { RANK_TIE_WIDTH } from '../../../engine/dosing/regimens.js';
import { parseTarget, TargetError } from '../../../engine/dosing/targets.js';
import { checkLevelTiming, checkRenalChange } from '../../../engine/dosing/warnings.js';
import { parseModelSpec } from '../../../engine/spec/modelSpec.js';

const ROOT = path.resolve(__dirname, '../../..');
const SPEC = {
  name: 'unit-test model (invented values)',
  source: 'invented for unit tests',
  structure: '1cmt',
  parameters: { CL: { typical: 3.5, bsv: 0.35 }, V: { typical: 50, bsv: 0.25 } },
  covariates: [{ parameter: 'CL', covariate: 'crcl_mL_min', relation: 'power', reference: 80, coefficient: 0.75, fixed: true }],
  residual: { model: 'combined', a: 1, b: 0.15 },
  covariateRanges: { crcl_mL_min: [20, 150], weight_kg: [40, 130] },
};
const PATIENT = {
  id: 'u1',
  covariates: { weight_kg: 82, age_y: 64, sex: 'M', scr_mg_dL: 1.1 },
  doses: [0, 12, 24].map((t) => ({ time_h: t, amount_mg: 1000, duration_h: 1, route: 'iv' })),
  levels: [
    { time_h: 23.5, conc_mg_L: 12 },
    { time_h: 26, conc_mg_L: 30 },
  ],
};
const TARGET = parseTarget(JSON.parse(readFileSync(path.join(ROOT, 'resources/targets/vancomycin-auc24.json'), 'utf8')));

function run(over: Partial<AdviceOptions> & { spec?: object; patient?: object } = {}) {
  const { spec, patient, ...rest } = over;
  return adviseDose({
    population: populationModelFromSpec(parseModelSpec(spec ?? SPEC)),
    patient: parsePatient(patient ?? PATIENT),
    target: TARGET,
    caution: 'CAUTION (test)',
    seed: 11,
    engineVersion: 'test',
    nDraws: 1000,
    ...rest,
  });
}

describe('resources', () => {
  it('every target preset parses, names its source and says "check local protocol"', () => {
    const dir = path.join(ROOT, 'resources/targets');
    const files = readdirSync(dir).filter((f) => f.endsWith('.json'));
    expect(files.length).toBeGreaterThanOrEqual(3);
    for (const f of files) {
      const t = parseTarget(JSON.parse(readFileSync(path.join(dir, f), 'utf8')));
      expect(t.id).toBe(f.replace(/\.json$/, ''));
      expect(t.source.length).toBeGreaterThan(20);
      expect(t.localProtocol).toMatch(/check local protocol/);
      expect(t.regimen).toBeDefined();
    }
  });

  it('the caution text exists once and the example models are labelled not for clinical use', () => {
    const c = JSON.parse(readFileSync(path.join(ROOT, 'resources/cautions/dosing.json'), 'utf8'));
    expect(c.text).toMatch(/decision support/);
    for (const f of readdirSync(path.join(ROOT, 'resources/models')).filter((x) => x.endsWith('.json'))) {
      const m = loadPopulationModel(JSON.parse(readFileSync(path.join(ROOT, 'resources/models', f), 'utf8')));
      expect(`${m.provenance.name} ${m.provenance.source}`).toMatch(/example, not for clinical use/);
    }
  });

  it('target files are validated with their paths', () => {
    expect(() => parseTarget({ id: 'x', label: 'x', source: 's', goals: [{ metric: 'auc', min: 1 }], toxic: [{ metric: 'trough', min: 2 }] })).toThrow(TargetError);
    try {
      parseTarget({ id: 'x', label: 'x', source: 's', goals: [{ metric: 'auc24', min: 4, perMic: true }], toxic: [] });
    } catch (e) {
      expect((e as TargetError).problems.join()).toContain('micMgL');
    }
  });
});

describe('adviseDose', () => {
  it('gives the documented advice fields, ranked best first, always with the caution', () => {
    const a = run();
    expect(a.status).toBe('advice');
    expect(a.caution).toBe('CAUTION (test)');
    for (const k of ['map', 'mean', 'sd', 'q05', 'q95']) expect(Object.keys((a.posterior as unknown as Record<string, object>)[k])).toEqual(['CL', 'V']);
    expect(a.regimens.length).toBeGreaterThan(10);
    const score = (r: (typeof a.regimens)[0]) => r.pTarget - (r.pToxic ?? 0);
    for (let i = 1; i < a.regimens.length; i++) expect(score(a.regimens[i - 1])).toBeGreaterThanOrEqual(score(a.regimens[i]) - RANK_TIE_WIDTH);
    expect(a.regimens[0].explanation).toMatch(/plausible versions of this patient/);
    const b = a.regimens[0].metrics.auc24!;
    expect(b.q025 <= b.q10 && b.q10 <= b.median && b.median <= b.q90 && b.q90 <= b.q975).toBe(true);
    expect(a.model).toMatchObject({ kind: 'model spec', source: 'invented for unit tests', structure: '1cmt' });
    expect(a.posterior.diagnostics.method).toBe('mcmc');
    expect(a.forecast!.intervals).toHaveLength(3);
    const c = a.forecast!.curve;
    for (let i = 0; i < c.timesH.length; i++) expect(c.q025[i] <= c.median[i] && c.median[i] <= c.q975[i]).toBe(true);
  });

  it('is reproducible from the seed and changes with it', () => {
    const a = JSON.stringify(run());
    expect(JSON.stringify(run())).toBe(a);
    expect(JSON.stringify(run({ seed: 12 }))).not.toBe(a);
  });

  it('draws from the prior when there are no levels, and says so', () => {
    const a = run({ patient: { ...PATIENT, levels: [] } });
    expect(a.posterior.diagnostics.method).toBe('prior');
    expect(a.posterior.map.CL).toBeCloseTo(a.posterior.typical.CL, 10);
    expect(a.warnings.some((w) => w.code === 'no-levels' && w.severity === 'flag')).toBe(true);
  });

  it('evaluates one given regimen as the only entry of regimens', () => {
    const a = run({ evaluate: { doseMg: 1250, intervalH: 12, durationH: 1.5, route: 'infusion' } });
    expect(a.regimens).toHaveLength(1);
    expect(a.regimens[0]).toMatchObject({ doseMg: 1250, intervalH: 12, durationH: 1.5 });
  });

  it('blocks advice for a patient outside the model covariate range, and shows it only on request', () => {
    const patient = { ...PATIENT, covariates: { ...PATIENT.covariates, scr_mg_dL: 6 } }; // CrCl about 14 mL/min
    const a = run({ patient });
    expect(a.status).toBe('blocked');
    expect(a.regimens).toEqual([]);
    expect(a.forecast).toBeNull();
    expect(a.warnings[0]).toMatchObject({ severity: 'block', code: 'covariate-out-of-range' });
    expect(a.warnings[0].message).toContain('crcl_mL_min');
    const shown = run({ patient, overrideBlocks: true });
    expect(shown.status).toBe('blocked-shown-on-request');
    expect(shown.regimens.length).toBeGreaterThan(0);
  });

  it('blocks on a level wildly inconsistent with the model and flags a level drawn during an infusion', () => {
    const a = run({ patient: { ...PATIENT, levels: [{ time_h: 23.5, conc_mg_L: 400 }, { time_h: 24.5, conc_mg_L: 30 }] } });
    expect(a.warnings.some((w) => w.code === 'level-inconsistent' && w.severity === 'block')).toBe(true);
    expect(a.warnings.some((w) => w.code === 'level-during-infusion')).toBe(true);
    expect(a.status).toBe('blocked');
  });

  it('blocks an example model', () => {
    const a = run({ spec: { ...SPEC, source: 'example, not for clinical use' } });
    expect(a.warnings.some((w) => w.code === 'example-model' && w.severity === 'block')).toBe(true);
  });

  it('refuses a patient without a covariate the model needs, and notes covariates it ignores', () => {
    expect(() => run({ patient: { ...PATIENT, covariates: { weight_kg: 80 } } })).toThrow(PriorError);
    try {
      run({ patient: { ...PATIENT, covariates: { weight_kg: 80 } } });
    } catch (e) {
      expect((e as Error).message).toContain('crcl_mL_min');
    }
    const a = run({ patient: { ...PATIENT, covariates: { ...PATIENT.covariates, height_cm: 180 } } });
    const note = a.warnings.find((w) => w.code === 'covariate-unused')?.message;
    expect(note).toContain('height_cm');
    // Age, sex, weight and creatinine enter through the Cockcroft-Gault clearance the model uses.
    expect(note).not.toContain('age_y');
  });

  it('refuses to advise without the caution text', () => {
    expect(() => run({ caution: ' ' })).toThrow(/caution/);
  });

  it('loading doses, when given, are rounded to the strength and above the maintenance dose, with the reason', () => {
    const a = run({ loadingDose: true });
    for (const r of a.regimens) {
      expect(r.loadingNote).toBeDefined();
      if (r.loadingDoseMg === undefined) continue;
      expect(r.loadingDoseMg % 250).toBe(0);
      expect(r.loadingDoseMg).toBeGreaterThan(r.doseMg);
    }
  });

  it('works with a two-compartment model with parameters without BSV', () => {
    const m = loadPopulationModel(JSON.parse(readFileSync(path.join(ROOT, 'resources/models/example-aminoglycoside-2cmt.json'), 'utf8')));
    const t = parseTarget(JSON.parse(readFileSync(path.join(ROOT, 'resources/targets/aminoglycoside-peak-mic.json'), 'utf8')));
    const p = parsePatient({ id: 'g', covariates: { weight_kg: 70, age_y: 50, sex: 'F', scr_mg_dL: 0.9 }, doses: [{ time_h: 0, amount_mg: 400, duration_h: 0.5 }], levels: [{ time_h: 1, conc_mg_L: 18 }, { time_h: 8, conc_mg_L: 3.5 }] });
    const a = adviseDose({ population: m, patient: p, target: t, caution: 'c', seed: 1, engineVersion: 't', nDraws: 1000, overrideBlocks: true, belowMgL: 1 });
    expect(Object.keys(a.posterior.map)).toEqual(['CL', 'V1', 'Q', 'V2']);
    expect(a.posterior.sd.Q).toBe(0);
    expect(a.regimens[0].metrics.peakAt).toBeDefined();
    expect(a.forecast!.timeBelow!.hours.median).toBeGreaterThan(0);
    expect(a.regimens.every((r) => r.intervalH >= 24)).toBe(true);
  });
});

describe('population model from a fit', () => {
  const fit = {
    format: 'plateau-fit',
    engineVersion: '0.1.0',
    seed: 3,
    dataHash: 'sha256:abc',
    spec: { ...SPEC, covariateRanges: undefined, source: undefined, covariates: [{ parameter: 'CL', covariate: 'crcl_mL_min', relation: 'power', reference: 80, coefficient: 0.5 }] },
    population: [
      { parameter: 'CL', kind: 'typical', estimate: 4.2, fixed: false },
      { parameter: 'V', kind: 'typical', estimate: 61, fixed: false },
      { parameter: 'CL', kind: 'covariate', covariate: 'crcl_mL_min', estimate: 0.81, fixed: false },
      { parameter: 'CL', kind: 'bsv', estimate: 0.22, fixed: false },
      { parameter: 'V', kind: 'bsv', estimate: 0.18, fixed: false },
      { parameter: 'a', kind: 'residual', estimate: 0.7, fixed: false },
      { parameter: 'b', kind: 'residual', estimate: 0.11, fixed: false },
    ],
    individual: [],
    trajectory: {},
    timing: {},
    warnings: [],
  };
  it('replaces the spec values by the estimates and records provenance; unknown ranges are warned', () => {
    const m = loadPopulationModel(fit);
    expect(m.provenance).toMatchObject({ kind: 'site fit', dataHash: 'sha256:abc', engineVersion: '0.1.0', seed: 3 });
    expect(m.spec.parameters.CL).toMatchObject({ typical: 4.2, bsv: 0.22 });
    expect(m.spec.parameters.V).toMatchObject({ typical: 61, bsv: 0.18 });
    expect(m.spec.covariates[0].coefficient).toBe(0.81);
    expect(m.spec.residual).toMatchObject({ a: 0.7, b: 0.11 });
    expect(m.covariateRanges).toBeNull();
    // Unknown ranges are reported once, by the advice's covariate-range check (tests/unit/dosing/checks.test.ts).
    expect(m.warnings.join()).not.toContain('covariate ranges');
    const withRanges = loadPopulationModel({ ...fit, covariateRanges: { crcl_mL_min: [30, 140] } });
    expect(withRanges.covariateRanges).toEqual({ crcl_mL_min: [30, 140] });
  });
  it('warns about poorly estimated population values', () => {
    const m = loadPopulationModel({ ...fit, population: fit.population.map((e) => (e.kind === 'bsv' && e.parameter === 'V' ? { ...e, rsePercent: 85 } : e)) });
    expect(m.warnings.some((w) => w.includes('bsv V') && w.includes('85 % RSE'))).toBe(true);
  });
  it('rejects entries that do not match the spec', () => {
    expect(() => loadPopulationModel({ ...fit, population: [...fit.population, { parameter: 'Q', kind: 'typical', estimate: 1 }] })).toThrow(PopulationModelError);
  });
});

describe('renal change in the advice', () => {
  it('flags a creatinine rise between levels and a covariate value older than the renal history', () => {
    const a = run({ patient: { ...PATIENT, renal: [{ time_h: 0, scr_mg_dL: 1.1 }, { time_h: 24, scr_mg_dL: 1.6 }] } });
    expect(a.warnings.some((w) => w.code === 'renal-change')).toBe(true);
    expect(a.warnings.some((w) => w.code === 'scr-stale')).toBe(true);
  });
});

describe('renal change', () => {
  // KDIGO 2012 AKI criteria (from memory): a rise >= 0.3 mg/dL within 48 h, or >= 1.5 x baseline.
  it('flags a creatinine rise and a marked fall, not small changes', () => {
    expect(checkRenalChange([{ timeH: 0, scrMgDl: 1.0 }, { timeH: 24, scrMgDl: 1.35 }])[0]?.code).toBe('renal-change');
    expect(checkRenalChange([{ timeH: 0, scrMgDl: 1.0 }, { timeH: 100, scrMgDl: 1.6 }])[0]?.code).toBe('renal-change');
    expect(checkRenalChange([{ timeH: 0, scrMgDl: 2.1 }, { timeH: 48, scrMgDl: 1.2 }])[0]?.message).toContain('fell');
    expect(checkRenalChange([{ timeH: 0, scrMgDl: 1.0 }, { timeH: 24, scrMgDl: 1.1 }])).toEqual([]);
  });
});

describe('level timing', () => {
  it('flags troughs not drawn shortly before a dose and peaks drawn during or long after an infusion', () => {
    const p = parsePatient({
      ...PATIENT,
      levels: [
        { time_h: 18, conc_mg_L: 12, kind: 'trough' },
        { time_h: 23.5, conc_mg_L: 12, kind: 'trough' },
        { time_h: 24.5, conc_mg_L: 30, kind: 'peak' },
        { time_h: 30, conc_mg_L: 20, kind: 'peak' },
        { time_h: 26, conc_mg_L: 25, kind: 'peak' },
      ],
    });
    const w = checkLevelTiming(p.doses, p.levels, 2, p.levelKinds);
    const codes = (t: number) => w.filter((x) => x.message.includes(`level at ${t} h`)).map((x) => x.code);
    expect(codes(18)).toEqual(['trough-timing']);
    expect(codes(23.5)).toEqual([]);
    expect(codes(24.5)).toEqual(['level-during-infusion', 'peak-timing']);
    expect(codes(30)).toEqual(['peak-timing']);
    expect(codes(26)).toEqual([]);
  });
});

describe('other structures', () => {
  const target = parseTarget({ id: 't', label: 't', source: 'test', goals: [{ metric: 'trough', min: 10, max: 20 }], toxic: [{ metric: 'peak', max: 25 }], regimen: { strengthMg: 100, minDoseMg: 100, maxDoseMg: 400, intervalsH: [8, 12], durationsH: [1] } });
  it('Michaelis-Menten: draws with no steady state count as toxic, and the table uses thinned draws', () => {
    const mm = populationModelFromSpec(parseModelSpec({ source: 'invented for the test', structure: '1cmt-mm', parameters: { Vmax: { typical: 20, bsv: 0.3 }, Km: { typical: 4, bsv: null }, V: { typical: 50, bsv: 0.2 } }, residual: { model: 'proportional', b: 0.1 }, covariateRanges: {} }));
    const p = parsePatient({ id: 'mm', covariates: {}, doses: [0, 12].map((t) => ({ time_h: t, amount_mg: 300, duration_h: 1 })), levels: [{ time_h: 11.9, conc_mg_L: 4 }] });
    const a = adviseDose({ population: mm, patient: p, target, caution: 'c', seed: 1, engineVersion: 't', nDraws: 600 });
    expect(a.warnings.some((w) => w.code === 'table-draws')).toBe(true);
    // 400 mg q8h (50 mg/h) exceeds Vmax (about 20 mg/h) for most draws: no steady state.
    const heavy = a.regimens.find((r) => r.doseMg === 400 && r.intervalH === 8)!;
    expect(heavy.failedDraws).toBeGreaterThan(0);
    expect(heavy.pToxic!).toBeGreaterThanOrEqual(heavy.failedDraws / 500);
    expect(a.warnings.some((w) => w.code === 'regimen-draws-failed')).toBe(true);
  });
  it('oral doses: a model with absorption gives oral regimens; without ka it is refused', () => {
    const oral = populationModelFromSpec(parseModelSpec({ source: 'invented for the test', structure: '1cmt', parameters: { CL: { typical: 4, bsv: 0.3 }, V: { typical: 40, bsv: 0.2 }, ka: { typical: 1.2, bsv: 0.3 }, F: { typical: 0.7, bsv: null, transform: 'logit' } }, residual: { model: 'combined', a: 0.2, b: 0.1 }, covariateRanges: {} }));
    const po = parsePatient({ id: 'o', covariates: {}, doses: [0, 12].map((t) => ({ time_h: t, amount_mg: 300, route: 'oral' })), levels: [{ time_h: 14, conc_mg_L: 5 }] });
    const a = adviseDose({ population: oral, patient: po, target, caution: 'c', seed: 1, engineVersion: 't', nDraws: 500 });
    expect(a.regimens.every((r) => r.route === 'oral' && r.durationH === 0)).toBe(true);
    // AUC24 of an oral regimen at steady state = F x daily dose / CL (superposition).
    const r = a.regimens[0];
    expect(r.metrics.auc24!.median).toBeGreaterThan(0);
    expect(() => adviseDose({ population: populationModelFromSpec(parseModelSpec({ ...SPEC, covariates: [] })), patient: po, target, caution: 'c', seed: 1, engineVersion: 't', nDraws: 200 })).toThrow(/absorption/);
  });
});

describe('regimen settings with no candidate', () => {
  it('blocks with a reason instead of returning an empty table silently', () => {
    const a = run({ regimenSettings: { strengthMg: 250, minDoseMg: 2000, maxDoseMg: 3000, intervalsH: [12], durationsH: [1], maxRateMgPerH: 1000 } });
    expect(a.status).toBe('blocked');
    expect(a.warnings[0].code).toBe('no-candidates');
  });
});
