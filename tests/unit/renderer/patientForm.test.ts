import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { parsePatient } from '../../../engine/dosing/patient.js';
import { listStructuralModels } from '../../../engine/models/catalogue.js';
import { parseModelSpec } from '../../../engine/spec/modelSpec.js';
import { checkEnteredForm, literatureForm } from '../../../renderer/src/features/dosing/enteredModel.js';
import { emptyForm, formFromPatientJson, formToPatient, parsePasted } from '../../../renderer/src/features/dosing/patientForm.js';

describe('Dosing patient form', () => {
  it('round-trips the demo patient file to the same patient the engine reads', () => {
    const json = JSON.parse(readFileSync(new URL('../../../resources/demo/patient.json', import.meta.url), 'utf8'));
    const { patient, problems } = formToPatient(formFromPatientJson({ ...json, renal: [] }));
    expect(problems).toEqual([]);
    const a = parsePatient(json);
    const b = parsePatient(patient);
    expect(b.doses).toEqual(a.doses);
    expect(b.levels).toEqual(a.levels);
    expect(b.covariates).toEqual(a.covariates);
    expect(b.levelKinds).toEqual(a.levelKinds);
    expect((patient as { renal: unknown[] }).renal).toEqual([]);
  });
  it('names every incomplete row instead of dropping it', () => {
    const f = emptyForm();
    f.id = 'bed 3';
    f.doses = [{ time: '2026-11-23 08:00', amountMg: '1000', durationH: '1', route: 'iv' }, { time: '', amountMg: '1000', durationH: '1', route: 'iv' }];
    f.levels = [{ time: '2026-11-23 19:30', concMgL: 'abc', censored: false, kind: '' }];
    const r = formToPatient(f);
    expect(r.patient).toBeUndefined();
    expect(r.problems).toEqual(['Dose 2: the time is empty; fill it in or remove the row.', 'Level 1: the concentration must be a number of mg/L (it is "abc").']);
  });
  it('reads pasted levels with "<" as below the limit and reports unreadable lines', () => {
    const r = parsePasted('time\tlevel\n12\t<2\n24\n', 'levels');
    expect(r.levels).toEqual([{ time: '12', concMgL: '2', censored: true, kind: '' }]);
    expect(r.problems).toEqual(['Pasted line 3: expected "time, concentration mg/L", got "24".']);
  });
});

describe('Dosing: a literature model entered in the form', () => {
  const entry = (() => {
    const m = listStructuralModels().find((x) => x.id === '1cmt')!;
    return { id: m.id, label: m.label, compartments: m.compartments, analytic: m.analytic, equation: m.equation, parameterOrder: [...m.parameterOrder], parameters: m.parameters.map((p) => ({ ...p, transforms: [...p.transforms] })) };
  })();
  it('needs a name, its source and readable ranges, then gives a spec the engine accepts', () => {
    const f = literatureForm(entry);
    expect(checkEnteredForm(f).problems).toEqual([
      'Name: give the model a name (drug, population, publication).',
      'Source: give the publication the values come from (authors, journal, year) and its population.',
      'Covariate range 1 minimum: "" is not a number.',
      'Covariate range 1 maximum: "" is not a number.',
    ]);
    f.name = 'Invented test model';
    f.source = 'Invented for this test';
    f.ranges = [{ covariate: 'weight_kg', min: '40', max: '130' }];
    const { spec, problems } = checkEnteredForm(f);
    expect(problems).toEqual([]);
    const parsed = parseModelSpec(spec);
    expect(parsed.source).toBe('Invented for this test');
    expect(parsed.covariateRanges).toEqual({ weight_kg: [40, 130] });
    expect(parsed.parameters.CL?.typical).toBe(4);
    expect(parsed.parameters.ka).toBeUndefined();
  });
});

describe('Models: categorical covariate effects in the editor', () => {
  it('reads "level: shift" pairs and names what it cannot read', async () => {
    const { formFor, formToSpec } = await import('../../../renderer/src/features/models/modelForm.js');
    const m = listStructuralModels().find((x) => x.id === '1cmt')!;
    const f = formFor({ id: m.id, label: m.label, compartments: 1, analytic: true, equation: m.equation, parameterOrder: [...m.parameterOrder], parameters: m.parameters.map((p) => ({ ...p, transforms: [...p.transforms] })) });
    f.covariates = [{ parameter: 'CL', covariate: 'sex', relation: 'categorical', reference: 'M', coefficient: 'F: -0.2', fixed: false }];
    const spec = parseModelSpec(formToSpec(f).spec);
    expect(spec.covariates[0]).toMatchObject({ relation: 'categorical', reference: 'M', coefficients: { F: -0.2 } });
    f.covariates[0].coefficient = 'F -0.2';
    expect(formToSpec(f).problems).toEqual(['Covariate effect 1: "F -0.2" is not "level: shift" (e.g. F: -0.2).', 'Covariate effect 1: give a shift for each other level, e.g. "F: -0.2".']);
  });
});
