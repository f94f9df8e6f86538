import { describe, expect, it } from 'vitest';
import { parseLocalClock, parsePatient, patientCovariate, PatientError } from '../../../engine/dosing/patient.js';

const base = () => ({
  id: 'p',
  covariates: { weight_kg: 70, age_y: 50, sex: 'M', scr_mg_dL: 1 },
  doses: [
    { time_h: 0, amount_mg: 1000, duration_h: 1, route: 'iv' },
    { time_h: 12, amount_mg: 1000, duration_h: 1, route: 'iv' },
  ],
  levels: [{ time_h: 11.5, conc_mg_L: 10, censored: false }],
});

function problems(json: unknown): string[] {
  try {
    parsePatient(json);
  } catch (e) {
    expect(e).toBeInstanceOf(PatientError);
    return [...(e as PatientError).problems];
  }
  throw new Error('expected a PatientError');
}

describe('parsePatient', () => {
  it('reads the documented contract', () => {
    const p = parsePatient(base());
    expect(p.id).toBe('p');
    expect(p.doses).toHaveLength(2);
    expect(p.doses[0]).toMatchObject({ timeH: 0, amountMg: 1000, route: 'infusion', durationH: 1 });
    expect(p.levels[0]).toMatchObject({ timeH: 11.5, valueMgL: 10, censored: false });
    expect(Object.getPrototypeOf(p.covariates)).toBe(null);
    // Cockcroft-Gault, hand-worked: (140 - 50) x 70 / (72 x 1) = 87.5 mL/min.
    expect(p.covariates.crcl_mL_min).toBeCloseTo(87.5, 12);
  });

  it('converts ISO local clock times to hours from the first dose, across midnight and without a zone', () => {
    const p = parsePatient({
      ...base(),
      doses: [
        { time: '2026-03-01T20:00', amount_mg: 1000, duration_h: 1 },
        { time: '2026-03-02 08:00', amount_mg: 1000, duration_h: 1 },
      ],
      levels: [{ time: '2026-03-02T07:30:00', conc_mg_L: 9 }],
      next_dose: '2026-03-02T20:00',
    });
    expect(p.doses.map((d) => d.timeH)).toEqual([0, 12]);
    expect(p.levels[0].timeH).toBe(11.5);
    expect(p.nextDoseH).toBe(24);
    expect(p.clockOrigin).toBe('2026-03-01T20:00');
    expect(parseLocalClock('2026-02-30T10:00')).toBeUndefined();
    expect(problems({ ...base(), doses: [{ time: '2026-03-01T20:00Z', amount_mg: 1, duration_h: 1 }], levels: [] }).join()).toContain('time zone');
  });

  it('rejects a mix of clock and hour times', () => {
    expect(problems({ ...base(), levels: [{ time: '2026-03-02T07:30', conc_mg_L: 9 }] }).join()).toContain('either time_h');
  });

  it('rejects overlapping infusions, duplicate dose times and levels before the first dose, naming where', () => {
    const ps = problems({
      ...base(),
      doses: [
        { time_h: 0, amount_mg: 1000, duration_h: 2 },
        { time_h: 1, amount_mg: 1000, duration_h: 1 },
        { time_h: 1, amount_mg: 500, duration_h: 0 },
      ],
      levels: [{ time_h: -1, conc_mg_L: 3 }],
    });
    expect(ps.some((p) => p.includes('doses[1]') && p.includes('overlapping'))).toBe(true);
    expect(ps.some((p) => p.includes('same time'))).toBe(true);
    expect(ps.some((p) => p.includes('levels[0]') && p.includes('before the first dose'))).toBe(true);
    // A level at the first dose time is pre-dose: before any dose as well.
    expect(problems({ ...base(), levels: [{ time_h: 0, conc_mg_L: 3 }] }).join()).toContain('at the time of the first dose');
  });

  it('rejects unknown units and implausible values with what to do', () => {
    const ps = problems({ ...base(), covariates: { weight_lb: 150, scr_mmol_L: 0.1, age_y: 50, sex: 'X' }, levels: [{ time_h: 2, conc_ug_L: 3 }], doses: [{ time_h: 0, amount_ug: 5, duration_h: 1 }] });
    expect(ps.some((p) => p.startsWith('covariates.weight_lb') && p.includes('weight_kg'))).toBe(true);
    expect(ps.some((p) => p.startsWith('covariates.scr_mmol_L') && p.includes('scr_mg_dL or scr_umol_L'))).toBe(true);
    expect(ps.some((p) => p.startsWith('covariates.sex'))).toBe(true);
    expect(ps.some((p) => p.startsWith('levels[0].conc_ug_L') && p.includes('unknown unit'))).toBe(true);
    expect(ps.some((p) => p.startsWith('doses[0].amount_ug') && p.includes('unknown unit'))).toBe(true);
    expect(problems({ ...base(), covariates: { weight_kg: 7000 } }).join()).toContain('plausible range');
    expect(problems({ ...base(), levels: [{ time_h: 2, conc_mg_L: 9800 }] }).join()).toContain('implausible');
  });

  it('takes umol/L creatinine (88.4 umol/L per mg/dL) and refuses it twice', () => {
    const p = parsePatient({ ...base(), covariates: { weight_kg: 70, age_y: 50, sex: 'F', scr_umol_L: 88.4 } });
    expect(p.covariates.scr_mg_dL).toBeCloseTo(1, 12);
    expect(p.covariates.crcl_mL_min).toBeCloseTo(0.85 * 87.5, 10);
    expect(problems({ ...base(), covariates: { scr_umol_L: 88.4, scr_mg_dL: 1 } }).join()).toContain('twice');
  });

  it('reads censored levels with their LLOQ and requires it', () => {
    const p = parsePatient({ ...base(), levels: [{ time_h: 20, censored: true, lloq_mg_L: 2 }] });
    expect(p.levels[0]).toMatchObject({ censored: true, valueMgL: 2, lloqMgL: 2 });
    expect(problems({ ...base(), levels: [{ time_h: 20, censored: true }] }).join()).toContain('LLOQ');
  });

  it('flags odd but possible records', () => {
    const p = parsePatient({ ...base(), levels: [{ time_h: 5, conc_mg_L: 1, lloq_mg_L: 2 }] });
    expect(p.notes.some((n) => n.code === 'below-lloq-uncensored')).toBe(true);
  });

  it('maps model covariate names to the patient by exact name, case and common aliases', () => {
    const p = parsePatient(base());
    expect(patientCovariate(p, 'weight_kg')?.value).toBe(70);
    expect(patientCovariate(p, 'WT')).toEqual({ value: 70, from: 'weight_kg' });
    expect(patientCovariate(p, 'CRCL')?.from).toBe('crcl_mL_min');
    expect(patientCovariate(p, 'albumin')).toBeUndefined();
  });

  it('does not let user keys reach the prototype', () => {
    const p = parsePatient({ ...base(), covariates: JSON.parse('{"__proto__": 5, "weight_kg": 70}') });
    expect(({} as Record<string, unknown>).weight_kg).toBeUndefined();
    expect(p.covariates.weight_kg).toBe(70);
  });
});
