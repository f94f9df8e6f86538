/**
 * What a person reads on screen: engine messages that name command-line options or patient-file
 * fields are pointed at the control in the view; ward clock times for clock-entered patients.
 * The engine messages quoted here are the engine's own (engine/import/build.ts,
 * engine/import/values.ts, engine/dosing/advise.ts, engine/dosing/patient.ts, engine/saem/saem.ts).
 */
import { describe, expect, it } from 'vitest';
import { clockTick, timeCell, wardClock } from '../../../renderer/src/lib/format/clock.js';
import { checkCovariateRanges } from '../../../engine/dosing/warnings.js';
import { parsePatient } from '../../../engine/dosing/patient.js';
import { covariateLabel, covariateRange, covariateWording } from '../../../renderer/src/lib/format/covariates.js';
import { dosingWording, fitWording, importWording } from '../../../renderer/src/lib/format/onScreen.js';
import { estimateRows } from '../../../renderer/src/features/results/estimates.js';

describe('engine messages on screen', () => {
  it('Import: options become the Reading options controls', () => {
    const m = importWording('text dates are read day-first because "31/03/2024" can only be day-first; 3 other date(s) would fit either order: confirm with --day-first');
    expect(m).toContain('confirm it in "Dates like 03/04" under "Reading options"');
    expect(m).not.toMatch(/--/);
    expect(importWording('"1,5" could be 1.5 (decimal comma) or 15 (thousands separator): give --decimal-comma if the file writes decimals with a comma')).toContain('tick "Decimal comma"');
    expect(importWording('the route is missing: give the route of such doses with --default-route bolus|infusion|oral (plateau check, then --save-mapping), or map a route column')).toBe('the route is missing: choose "Route when none is given" under "Reading options" (section 1), or give a column the role of route');
    expect(importWording('the level unit µmol/L is molar: give the drug\'s molar mass (g/mol) in the mapping (molarMassGPerMol) or with --molar-mass')).not.toMatch(/--|molarMassGPerMol/);
  });
  it('Dosing: patient-file fields become the form labels; the rest of the message is kept', () => {
    const m = dosingWording('next dose assumed at 48 h (2026-11-25 08:00) (one interval of 12 h after the last dose); give next_dose_h to set it');
    expect(m).toBe('next dose assumed at 48 h (2026-11-25 08:00) (one interval of 12 h after the last dose); set it in "Next dose can start at" (2. Patient)');
    expect(dosingWording('doses[1].amount_mg: 200000 mg is implausible for one dose; check the unit (mg expected)')).toBe('Dose 2 amount (mg): 200000 mg is implausible for one dose; check the unit (mg expected)');
    expect(dosingWording('levels[0].time: "x" is not a date-time "YYYY-MM-DDTHH:MM[:SS]"')).toMatch(/^Level 1 time: /);
    expect(dosingWording('no target given: the current regimen (1 g every 12 h) is evaluated without ranking; give --target to rank regimens')).toContain('choose a target preset under 3. Target');
  });
  it('fit warnings name the Models setting', () => {
    const m = fitWording('search reached its cap of 60 iterations before the trajectory settled; check the convergence plot or raise estimation.searchMaxIterations');
    expect(m).toContain('raise "Search phase: at most (iterations)" in Models');
    expect(m).not.toContain('estimation.');
  });
});

describe('ward clock times', () => {
  it('adds hours to the first dose on the wall clock, across midnight and month ends', () => {
    // 2026-11-23 is a Monday (calendar arithmetic, common practice).
    expect(wardClock('2026-11-23T08:00', 35.5)).toBe('Tue 24 Nov 19:30');
    expect(wardClock('2026-11-30T20:00', 6)).toBe('Tue 1 Dec 02:00');
    expect(wardClock(undefined, 3)).toBeUndefined();
    expect(clockTick('2026-11-23T08:00', 48)).toBe('25 Nov 08:00');
    expect(timeCell(undefined, 35.5)).toBe('35.5 h');
  });
});

describe('clock axis ticks', () => {
  it('fall on round ward times', async () => {
    const { clockTickHours } = await import('../../../renderer/src/lib/format/clock.js');
    // First dose 08:00; 0-120 h -> every 12 h on the clock: 20:00 (12 h), 08:00 (24 h), ...
    const t = clockTickHours('2026-11-23T08:00', 0, 120);
    expect(t[0]).toBe(4); // 12:00 the first day
    expect(t.every((h, i) => i === 0 || h - t[i - 1] === 12)).toBe(true);
    expect(t.length).toBeLessThanOrEqual(11);
    expect(clockTick('2026-11-23T08:00', t[0])).toBe('23 Nov 12:00');
    expect(clockTickHours('2026-11-23T08:30', 0, 20).map((h) => clockTick('2026-11-23T08:30', h))[0]).toBe('23 Nov 09:00');
  });
});

describe('covariates in words', () => {
  it('names the patient-file keys with their units', async () => {
    const { covariateText, covariateName } = await import('../../../renderer/src/features/dosing/predicted.js');
    expect(covariateText('weight_kg', 78)).toBe('weight 78 kg');
    expect(covariateText('scr_mg_dL', 1.17647)).toBe('serum creatinine 1.176 mg/dL');
    expect(covariateText('sex', 'F')).toBe('sex F');
    expect(covariateText('albumin_g_L', 30)).toBe('albumin_g_L 30');
    expect(covariateName('crcl_mL_min')).toBe('creatinine clearance');
  });

  it('covariate keys in engine messages become display names with units; file keys and paths stay', () => {
    // The engine's own messages (engine/dosing/warnings.ts checkCovariateRanges).
    const [missing, outside] = checkCovariateRanges(new Map<string, unknown>([['crcl_mL_min', 25]]), { weight_kg: [40, 130], crcl_mL_min: [30, 120] });
    expect(dosingWording(missing.message)).toBe('the model was built on weight (kg) 40-130; the patient file has no weight (kg), so that range is not checked');
    expect(dosingWording(outside.message)).toBe('creatinine clearance (mL/min) = 25 lies outside the range the model was built on (30-120): the model extrapolates for this patient');
    // A patient-file path names the form's field; a key quoted as a suggestion for the file stays a key.
    let problem = '';
    try {
      parsePatient({ id: 'x', covariates: { weight_kg: 900, wieght_kg: 70 }, doses: [{ time_h: 0, amount_mg: 1000, duration_h: 1 }], levels: [] });
    } catch (e) {
      problem = (e as { problems?: string[] }).problems?.join(' | ') ?? String(e);
    }
    expect(problem).toContain('covariates.weight_kg: 900 is outside the plausible range');
    expect(dosingWording(problem)).toContain('Patient weight (kg): 900 is outside the plausible range');
    expect(dosingWording(problem)).toContain('(did you mean "weight_kg"?)');
    // Fit and queue messages (engine/stats/model.ts); one parenthesis for the unit and the parameter.
    expect(fitWording('no value for covariate crcl_mL_min used on CL; add the column for every subject or remove the effect')).toBe('no value for covariate creatinine clearance (mL/min) used on CL; add the column for every subject or remove the effect');
    expect(dosingWording('covariate scr_umol_L (on CL): the patient has no value; add it to patient.json covariates')).toBe('covariate serum creatinine (µmol/L, on CL): the patient has no value; add it to patient.json covariates');
    expect(fitWording('the fit estimated covariate CL~weight_kg with 80 % RSE: the prior rests on a poorly determined value')).toContain('CL~weight (kg) with 80 % RSE');
    expect(importWording('patient P1: age_y 130 is implausible')).toBe('patient P1: age (years) 130 is implausible');
    // Unknown covariates, sex and words that only contain a key are left alone.
    expect(covariateWording('albumin_g_L and sex=F, my_weight_kg, weight_kgs')).toBe('albumin_g_L and sex=F, my_weight_kg, weight_kgs');
    expect(covariateLabel('crcl_mL_min')).toBe('creatinine clearance (mL/min)');
    expect(covariateLabel('sex')).toBe('sex');
    expect(covariateRange('crcl_mL_min', 30, 120)).toBe('creatinine clearance 30–120 mL/min');
    // The Results table names the covariate of an effect the same way.
    const rows = estimateRows({ spec: { parameters: { CL: { transform: 'log' } }, residual: { model: 'additive' } }, population: [{ parameter: 'CL', kind: 'covariate', covariate: 'crcl_mL_min', estimate: 0.7, fixed: false }, { parameter: 'CL', kind: 'covariate', covariate: 'sex=F', estimate: -0.2, fixed: false }] });
    expect(rows.map((r) => r.label)).toEqual(['CL: effect of creatinine clearance (mL/min)', 'CL: effect of sex = F']);
  });
});
