/**
 * Issue 9 finding 1 and issue 11 finding 8: hand-written JSON (model spec, patient.json, target
 * file) is strict. Each case starts from a shipped file (resources/demo/ward-model.json,
 * resources/demo/patient.json, resources/targets/vancomycin-auc24.json) with the one mistake a
 * user made; before this change each was silently ignored or gave an internal error.
 */
import { readFileSync } from 'node:fs';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import { parsePatient } from '../../../engine/dosing/patient.js';
import { loadPopulationModel } from '../../../engine/dosing/population.js';
import { parseTarget } from '../../../engine/dosing/targets.js';
import { jsonFileKind } from '../../../engine/spec/fileKind.js';
import { parseModelSpec } from '../../../engine/spec/modelSpec.js';

const ROOT = path.resolve(__dirname, '../../..');
const read = (rel: string) => JSON.parse(readFileSync(path.join(ROOT, rel), 'utf8')) as Record<string, any>;
const DEMO_MODEL = 'resources/demo/ward-model.json';
const DEMO_PATIENT = 'resources/demo/patient.json';
const TARGET = 'resources/targets/vancomycin-auc24.json';

function problemsOf(f: () => unknown): string[] {
  try {
    f();
  } catch (e) {
    return [...((e as { problems?: string[] }).problems ?? [(e as Error).message])];
  }
  throw new Error('expected the input to be refused');
}

describe('strict model spec (from resources/demo/ward-model.json)', () => {
  it('"bvs" for "bsv" is refused with its path and the nearest key (it fitted CL with no BSV)', () => {
    const spec = read(DEMO_MODEL);
    spec.parameters.CL.bvs = spec.parameters.CL.bsv;
    delete spec.parameters.CL.bsv;
    expect(problemsOf(() => parseModelSpec(spec))).toContain('parameters.CL.bvs: unknown key (did you mean "bsv"?)');
  });

  it('unknown keys at the top, in a covariate effect, the residual and the solver are refused', () => {
    const spec = read(DEMO_MODEL);
    spec.covarites = [];
    spec.covariates[0].coeficient = 0.5;
    spec.residual.bb = 0.1;
    spec.solver = { reltol: 1e-6 };
    const p = problemsOf(() => parseModelSpec(spec));
    expect(p).toContain('covarites: unknown key (did you mean "covariates"?)');
    expect(p).toContain('covariates[0].coeficient: unknown key (did you mean "coefficient"?)');
    expect(p.some((x) => x.startsWith('residual.bb: unknown key (did you mean'))).toBe(true);
    expect(p).toContain('solver.reltol: unknown key (did you mean "relTol"?)');
  });

  it('"structure": "toString" and other prototype names give a clean message, not a TypeError', () => {
    for (const name of ['toString', 'constructor', '__proto__', 'hasOwnProperty']) {
      const spec = read(DEMO_MODEL);
      spec.structure = name;
      const p = problemsOf(() => parseModelSpec(spec));
      expect(p.join('\n')).toContain(`structure: unknown model id "${name}"; give one of 1cmt, 2cmt, 3cmt, 1cmt-mm`);
    }
  });

  it('a residual value the error model does not use is refused, not ignored', () => {
    const spec = read(DEMO_MODEL);
    spec.residual = { model: 'proportional', a: 1, b: 0.2 };
    expect(problemsOf(() => parseModelSpec(spec))).toContain('residual.a: not used by proportional error; remove it');
  });

  it('issue 11 finding 1: a typical CL of 1e-320 passes "> 0" but is refused as implausible', () => {
    const spec = read(DEMO_MODEL);
    spec.parameters.CL.typical = 1e-320;
    expect(problemsOf(() => parseModelSpec(spec)).join('\n')).toMatch(/parameters\.CL\.typical: .*outside the plausible range/);
    const spec2 = read(DEMO_MODEL);
    spec2.covariates[0].coefficient = 1e308;
    expect(problemsOf(() => parseModelSpec(spec2)).join('\n')).toMatch(/covariates\[0\]\.coefficient: 1e\+308 is implausible/);
  });
});

describe('strict patient.json (from resources/demo/patient.json)', () => {
  it('"duraton_h" is refused (the doses became boluses and advice was given)', () => {
    const p = read(DEMO_PATIENT);
    p.doses[1].duraton_h = p.doses[1].duration_h;
    delete p.doses[1].duration_h;
    expect(problemsOf(() => parsePatient(p))).toContain('doses[1].duraton_h: unknown key (did you mean "duration_h"?)');
  });

  it('"level" for "levels" is refused (advice came from the prior alone)', () => {
    const p = read(DEMO_PATIENT);
    p.level = p.levels;
    delete p.levels;
    expect(problemsOf(() => parsePatient(p))).toContain('level: unknown key (did you mean "levels"?)');
  });

  it('unknown keys in a level and a renal record, and a misspelt covariate name, are refused', () => {
    const p = read(DEMO_PATIENT);
    p.levels[0].censred = false;
    p.renal = [{ time: '2026-11-23T08:00', scr_umol_l: 104, scr_mg_dl: 1 }];
    p.covariates.wieght_kg = 78;
    const out = problemsOf(() => parsePatient(p));
    expect(out).toContain('levels[0].censred: unknown key (did you mean "censored"?)');
    expect(out).toContain('renal[0].scr_umol_l: unknown key (did you mean "scr_umol_L"?)');
    expect(out).toContain('covariates.wieght_kg: unknown covariate (did you mean "weight_kg"?)');
  });
});

describe('strict target file (from resources/targets/vancomycin-auc24.json)', () => {
  it('unknown keys at the top, in a goal and in the regimen settings are refused', () => {
    const t = read(TARGET);
    t.goal = t.goals;
    t.toxic[0].maxx = 600;
    t.regimen.maxDoseMG = 3000;
    const out = problemsOf(() => parseTarget(t));
    expect(out).toContain('goal: unknown key (did you mean "goals"?)');
    expect(out).toContain('toxic[0].maxx: unknown key (did you mean "max"?)');
    expect(out).toContain('regimen.maxDoseMG: unknown key (did you mean "maxDoseMg"?)');
  });

  it('issue 11 finding 6: strength 1 mg with maxDoseMg 1e308 is refused up front with the bound stated', () => {
    const t = read(TARGET);
    t.regimen.strengthMg = 1;
    t.regimen.maxDoseMg = 1e308;
    const out = problemsOf(() => parseTarget(t));
    expect(out).toContain('regimen.maxDoseMg: must be a number from 0.1 to 20000 mg, got 1e+308');
    const t2 = read(TARGET);
    t2.regimen.strengthMg = 1;
    t2.regimen.maxDoseMg = 20000;
    expect(problemsOf(() => parseTarget(t2)).join('\n')).toContain('more than 400');
  });
});

describe('a file of the wrong kind is named', () => {
  it('recognises each kind from its keys', () => {
    expect(jsonFileKind(read(DEMO_PATIENT))).toBe('patient file');
    expect(jsonFileKind(read(DEMO_MODEL))).toBe('model spec');
    expect(jsonFileKind(read(TARGET))).toBe('target file');
    expect(jsonFileKind({ population: [], spec: {} })).toBe('fit.json');
  });

  it('a patient file as the model, a model as the patient, a target as the patient', () => {
    expect(problemsOf(() => loadPopulationModel(read(DEMO_PATIENT))).join('\n')).toContain('this looks like a patient file, not a model spec or a fit.json');
    expect(problemsOf(() => parseModelSpec(read(DEMO_PATIENT))).join('\n')).toContain('this looks like a patient file');
    expect(problemsOf(() => parsePatient(read(DEMO_MODEL))).join('\n')).toContain('this looks like a model spec, not a patient file');
    expect(problemsOf(() => parsePatient(read(TARGET))).join('\n')).toContain('this looks like a target file, not a patient file');
    expect(problemsOf(() => parsePatient({ population: [], spec: {} })).join('\n')).toContain('this looks like a fit.json, not a patient file');
    expect(problemsOf(() => parseTarget(read(DEMO_PATIENT))).join('\n')).toContain('this looks like a patient file, not a target file');
  });
});

describe('an import mapping template is recognised', () => {
  it('given as a model or a patient', () => {
    const template = { format: 'plateau-import-mapping', version: 1, sheets: [], options: {} };
    expect(jsonFileKind(template)).toBe('import mapping template');
    expect(problemsOf(() => loadPopulationModel(template)).join('\n')).toContain('this looks like an import mapping template');
    expect(problemsOf(() => parsePatient(template)).join('\n')).toContain('this looks like an import mapping template');
  });
});

describe('prototype names as values give clean messages, never a TypeError (issue 11 finding 8)', () => {
  const NAMES = ['toString', 'constructor', '__proto__', 'valueOf', 'hasOwnProperty', 'prototype'];
  const cases: Array<[string, string, (o: Record<string, any>, v: string) => void, (o: unknown) => unknown]> = [
    ['spec structure', DEMO_MODEL, (o, v) => (o.structure = v), parseModelSpec],
    ['spec transform', DEMO_MODEL, (o, v) => (o.parameters.CL.transform = v), parseModelSpec],
    ['spec covariate relation', DEMO_MODEL, (o, v) => (o.covariates[0].relation = v), parseModelSpec],
    ['spec covariate parameter', DEMO_MODEL, (o, v) => (o.covariates[0].parameter = v), parseModelSpec],
    ['spec residual model', DEMO_MODEL, (o, v) => (o.residual.model = v), parseModelSpec],
    ['spec parameter name', DEMO_MODEL, (o, v) => (o.parameters = JSON.parse(`{"${v}": {"typical": 1}, "CL": {"typical": 1}, "V": {"typical": 1}}`)), parseModelSpec],
    ['patient route', DEMO_PATIENT, (o, v) => (o.doses[0].route = v), parsePatient],
    ['patient level kind', DEMO_PATIENT, (o, v) => (o.levels[0].kind = v), parsePatient],
    ['patient sex', DEMO_PATIENT, (o, v) => (o.covariates.sex = v), parsePatient],
    ['target metric', TARGET, (o, v) => (o.goals[0].metric = v), parseTarget],
  ];
  for (const [name, file, set, parse] of cases)
    it(name, () => {
      for (const v of NAMES) {
        const o = read(file);
        set(o, v);
        let err: unknown;
        try {
          parse(o);
        } catch (e) {
          err = e;
        }
        expect(err, `${name} = ${v}`).toBeDefined();
        expect(err).not.toBeInstanceOf(TypeError);
        expect(Array.isArray((err as { problems?: unknown }).problems)).toBe(true);
      }
    });
});

describe('implausible times in patient.json are refused (issue 11 finding 6)', () => {
  it('time_h, duration_h, ss_interval_h and next_dose_h beyond their bounds', () => {
    const p = { id: 'x', covariates: {}, doses: [{ time_h: 0, amount_mg: 1000, duration_h: 1e308, ss_interval_h: 1e9 }, { time_h: 1e308, amount_mg: 1000 }], levels: [], next_dose_h: 1e12 };
    const out = problemsOf(() => parsePatient(p)).join('\n');
    expect(out).toContain('doses[0].duration_h: 1e+308 h is implausible');
    expect(out).toContain('doses[0].ss_interval_h: must be the dosing interval in hours');
    expect(out).toContain('doses[1].time_h: 1e+308 h is implausible');
  });
});

describe('a fit.json where a model spec is expected (plateau simulate / fit --model)', () => {
  it('is named, with where its spec is', () => {
    expect(problemsOf(() => parseModelSpec({ population: [], spec: read(DEMO_MODEL) }))).toEqual(['this looks like a fit.json, not a model spec (its "spec" entry holds the spec it was fitted with)']);
  });
});
