/**
 * Issue 9 findings 2, 3, 5, 6, 7 and issue 11 findings 1, 8, reproduced from the demo files:
 * resources/demo/patient.json (an invented patient on 1250 mg q12h, above target) with
 * resources/models/example-vancomycin-1cmt.json (the model the demo data were simulated from)
 * and the vancomycin-auc24 preset. The example model blocks advice, so the regimens are shown on
 * request (overrideBlocks); every assertion is about what the advice says.
 */
import { readFileSync } from 'node:fs';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import { adviseDose, type Advice, type AdviceOptions } from '../../../engine/dosing/advise.js';
import { parsePatient } from '../../../engine/dosing/patient.js';
import { loadPopulationModel, populationModelFromSpec } from '../../../engine/dosing/population.js';
import { parseRegimen } from '../../../engine/dosing/regimens.js';
import { formatAdvice } from '../../../engine/dosing/report.js';
import { parseTarget } from '../../../engine/dosing/targets.js';
import { parseModelSpec, type ModelSpec } from '../../../engine/spec/modelSpec.js';

const ROOT = path.resolve(__dirname, '../../..');
const read = (rel: string) => JSON.parse(readFileSync(path.join(ROOT, rel), 'utf8'));
const DEMO_PATIENT = read('resources/demo/patient.json');
const EXAMPLE_MODEL = read('resources/models/example-vancomycin-1cmt.json');
const TARGET = parseTarget(read('resources/targets/vancomycin-auc24.json'));

function advise(over: Partial<AdviceOptions> & { patient?: object } = {}): Advice {
  const { patient, ...rest } = over;
  return adviseDose({ population: loadPopulationModel(EXAMPLE_MODEL), patient: parsePatient(patient ?? DEMO_PATIENT), target: TARGET, caution: 'CAUTION (test)', seed: 1, engineVersion: 't', nDraws: 1000, overrideBlocks: true, ...rest });
}

describe('demo patient on 1250 mg q12h, above target (resources/demo/patient.json)', () => {
  const a = advise({ loadingDose: true });
  const text = formatAdvice(a);

  it('finding 2: no loading dose for a patient already on therapy and above target, and the advice says why', () => {
    expect(a.regimens.every((r) => r.loadingDoseMg === undefined)).toBe(true);
    expect(a.warnings.some((w) => w.code === 'loading-not-indicated')).toBe(true);
  });

  it('finding 3: the current regimen is shown first against the target, with its probabilities', () => {
    expect(a.current).toMatchObject({ doseMg: 1250, intervalH: 12, durationH: 1.5 });
    expect(a.current!.metrics.auc24!.median).toBeGreaterThan(600);
    expect(a.current!.pToxic!).toBeGreaterThan(0.9);
    expect(text.indexOf('current regimen 1250 mg every 12 h')).toBeGreaterThan(0);
    expect(text.indexOf('current regimen 1250 mg every 12 h')).toBeLessThan(text.indexOf('Advised regimens'));
  });

  it('finding 3: exposure above the toxic limit now is said first, with a hold and the time to fall below a level', () => {
    expect(a.now!.auc24.median).toBeGreaterThan(600);
    expect(a.now!.pToxic!).toBeGreaterThan(0.5);
    const w = a.warnings.find((x) => x.code === 'toxic-now')!;
    expect(w.message).toMatch(/consider holding or delaying the next dose/);
    // Every number in it carries its unit (common practice for ward messages).
    expect(w.message).toMatch(/AUC24 \d+ mg.h\/L above the toxic limit 600 mg.h\/L/);
    expect(a.hold!.belowAtClock).toMatch(/^2026-11-2\d \d\d:\d\d$/);
    expect(a.hold!.belowAtH).toBeGreaterThan(a.patient.nextDoseH);
    // The advised regimens start after the hold, and the forecast starts there too.
    expect(a.regimenStart).toMatchObject({ timeH: a.hold!.belowAtH, delayed: true });
    expect(a.forecast!.intervals[0].startH).toBeCloseTo(a.hold!.belowAtH, 6);
    const firstLines = text.split('\n').slice(0, 8).join('\n');
    expect(firstLines).toContain('NOW: exposure now is above the toxic limit');
  });

  it('P(toxic) covers the intervals the forecast shows, not only steady state', () => {
    for (const r of a.regimens) {
      expect(r.pToxic!).toBeGreaterThanOrEqual(r.pToxicSteadyState! - 1e-9);
      expect(r.pToxic!).toBeGreaterThanOrEqual(r.pToxicFirstIntervals! - 1e-9);
    }
    const best = a.regimens[0];
    // The forecast uses its own (thinned) draws: agreement within Monte Carlo error.
    for (const iv of a.forecast!.intervals) expect(iv.pToxic!).toBeLessThanOrEqual(best.pToxic! + 0.05);
  });

  it('finding 5: units on the parameters and the metrics, in advice.json and in the text', () => {
    expect(a.units).toMatchObject({ CL: 'L/h', V: 'L', auc24: 'mg.h/L', trough: 'mg/L', intervalH: 'h', doseMg: 'mg' });
    expect(text).toMatch(/CL L\/h\s/);
    expect(text).toMatch(/V L\s/);
    expect(text).toContain('AUC24 mg.h/L');
    // Covariate effects named by their relation, residual error with its unit.
    expect(a.model.values).toContain('CL: power exponent 0.75 on crcl_mL_min (CL x (crcl_mL_min / 80)^0.75)');
    expect(a.model.values).toContain('CL typical 3.5 L/h, BSV 0.35 (SD on the log scale)');
    expect(a.model.values.some((v) => v.includes('a 1 mg/L (additive SD)'))).toBe(true);
    expect(text).toContain('power exponent 0.75 on crcl_mL_min');
  });

  it('finding 6: ward clock times, and the doses and levels echoed as interpreted', () => {
    expect(a.patient.doses).toHaveLength(4);
    expect(a.patient.doses[1]).toEqual({ timeH: 12, clock: '2026-11-23 20:00', amountMg: 1250, route: 'infusion', durationH: 1.5 });
    expect(a.patient.levels[0]).toEqual({ timeH: 35.5, clock: '2026-11-24 19:30', concMgL: 18.4, censored: false, kind: 'trough' });
    expect(a.patient.nextDoseClock).toBe('2026-11-25 08:00');
    expect(text).toContain('dose   2026-11-23 20:00 (12.0 h) 1250 mg');
    expect(text).toContain('level  2026-11-24 19:30 (35.5 h) 18.4 mg/L');
    expect(text).toMatch(/interval 1 \(2026-11-2\d \d\d:\d\d/);
  });

  it('finding 7: statistics in a details section with explanations, after the plain words', () => {
    const details = text.indexOf('Details (statistics behind the advice)');
    expect(details).toBeGreaterThan(text.indexOf('Advised regimens'));
    for (const term of ['P(y_rep <= y):', 'IWRES:', 'ESS', 'R-hat']) expect(text.indexOf(term)).toBeGreaterThan(details);
    expect(text.split('CAUTION (test)').length - 1).toBe(1);
  });
});

describe('the loading-dose forecast agrees with its text', () => {
  // The demo patient's first dose only, 4 days ago: no drug on board.
  const patient = { ...DEMO_PATIENT, doses: [DEMO_PATIENT.doses[0]], levels: [], next_dose: '2026-11-27T08:00' };
  const a = advise({ patient, loadingDose: true, nDraws: 500 });

  it('gives a loading dose when there is no drug on board, and the first forecast peak is near the steady-state peak', () => {
    const best = a.regimens[0];
    expect(best.loadingDoseMg).toBeGreaterThan(best.doseMg);
    expect(best.loadingNote).toMatch(/first peak is predicted at .* against a steady-state peak of/);
    const first = a.forecast!.intervals[0];
    expect(first.doseMg).toBe(best.loadingDoseMg);
    const ss = best.metrics.peak!.median;
    expect(Math.abs(first.peak.median / ss - 1)).toBeLessThan(0.2);
  });

  it('an evaluated loading regimen whose first interval overshoots gets that overshoot in P(toxic) (finding 2: "1250 mg then 750 mg q12h", P(toxic) 6 %)', () => {
    const onTherapy = { ...DEMO_PATIENT, next_dose: '2026-11-25T08:00' };
    const b = advise({ patient: onTherapy, evaluate: parseRegimen('load 2500mg 750mg q12h 1h') });
    const r = b.regimens[0];
    const firstAuc = b.forecast!.intervals[0].auc24.median;
    expect(firstAuc).toBeGreaterThan(600);
    expect(r.pToxicSteadyState!).toBeLessThan(0.3);
    expect(r.pToxic!).toBeGreaterThan(0.5);
    expect(r.pToxicFirstIntervals!).toBeGreaterThan(0.5);
    expect(b.warnings.some((w) => w.code === 'loading-not-indicated' && w.severity === 'flag')).toBe(true);
    // The current regimen is shown with --evaluate too.
    expect(b.current).toMatchObject({ doseMg: 1250, intervalH: 12 });
  });
});

describe('issue 11: no advice from non-finite numbers, text from files printed safely', () => {
  it('a model whose predictions are not finite (CL 1e-320, built past the parser) blocks with the reason', () => {
    const spec = parseModelSpec({ ...EXAMPLE_MODEL, name: 'test', source: 'test' }) as ModelSpec;
    spec.parameters.CL!.typical = 1e-320;
    spec.parameters.CL!.bsv = null;
    let a: Advice | undefined;
    let error: Error | undefined;
    try {
      a = adviseDose({ population: populationModelFromSpec(spec), patient: parsePatient(DEMO_PATIENT), target: TARGET, caution: 'c', seed: 1, engineVersion: 't', nDraws: 200 });
    } catch (e) {
      error = e as Error;
    }
    if (a) {
      expect(a.status).toBe('blocked');
      expect(a.regimens).toEqual([]);
      expect(a.warnings.some((w) => w.severity === 'block' && w.code === 'non-finite' && /auc24 NaN/.test(w.message))).toBe(true);
    } else expect(error!.message).toMatch(/CL|finite|predict/);
  });

  it('escape codes and CR-LF in a patient id cannot forge a line', () => {
    const p = { ...DEMO_PATIENT, id: 'bed 4\u001b[2J\r\nADVICE: give 5000 mg' };
    const text = formatAdvice(advise({ patient: p, nDraws: 200 }));
    expect(text).not.toContain('\u001b');
    expect(text).not.toContain('\r');
    expect(text.split('\n').some((l) => l.startsWith('ADVICE:'))).toBe(false);
    expect(text).toContain('bed 4\\x1b[2J\\r\\nADVICE: give 5000 mg');
  });

  it('regimen settings beyond the bounds are refused up front, with the bound', () => {
    expect(() => advise({ regimenSettings: { strengthMg: 1, minDoseMg: 1, maxDoseMg: 1e308, intervalsH: [12], durationsH: [1] } })).toThrow(/maxDoseMg: must be a number from 0.1 to 20000 mg/);
    expect(() => advise({ nDraws: 1e9 })).toThrow(/draws must be an integer from 100 to 100000/);
  });
});

describe('fit warnings that bear on the prior are FLAGs, post-fit internal notes are not', () => {
  const fit = {
    engineVersion: '0.1.0',
    spec: { structure: '1cmt', parameters: { CL: { typical: 3 , bsv: 0.3 }, V: { typical: 50, bsv: 0.2 } }, residual: { model: 'additive', a: 1 } },
    population: [
      { parameter: 'CL', kind: 'typical', estimate: 3.4, fixed: false, se: 0.1 },
      { parameter: 'V', kind: 'typical', estimate: 52, fixed: false, se: 2 },
    ],
    uncertainty: { ok: true },
    warnings: ['(second method) linearisation: 3 level(s) below the LLOQ are left out of the linearised likelihood', 'search reached its cap of 600 iterations before the trajectory settled'],
  };
  it('(second method) linearisation note is a note; the cap warning is a FLAG', () => {
    const m = loadPopulationModel(fit);
    const byText = (s: string) => m.checks!.find((c) => c.message.includes(s))!;
    expect(byText('(second method)').severity).toBe('note');
    expect(byText('search reached its cap').severity).toBe('flag');
  });
});

describe('clock times in the checks (resources/demo/patient.json)', () => {
  it('times in check messages carry the ward clock time', () => {
    const a = advise({ nDraws: 200 });
    const note = a.warnings.find((w) => w.code === 'next-dose-assumed')!;
    expect(note.message).toContain('at 48 h (2026-11-25 08:00)');
  });
});

describe('a fit whose values are not plausible cannot be a prior (issue 11 findings 1 and 5)', () => {
  const base = {
    spec: { structure: '1cmt', parameters: { CL: { typical: 3, bsv: 0.3 }, V: { typical: 50, bsv: 0.2 } }, covariates: [{ parameter: 'CL', covariate: 'crcl_mL_min', relation: 'power', reference: 80, coefficient: 0.5 }], residual: { model: 'combined', a: 1, b: 0.1 } },
    population: [
      { parameter: 'CL', kind: 'typical', estimate: 3.4 },
      { parameter: 'V', kind: 'typical', estimate: 52 },
    ],
  };
  const refused = (entry: object) => {
    try {
      loadPopulationModel({ ...base, population: [...base.population, entry] });
    } catch (e) {
      return ((e as { problems?: string[] }).problems ?? []).join('\n');
    }
    return 'accepted';
  };
  it('typical CL 1e-320, a covariate coefficient of 1e308, a collapsed residual error', () => {
    expect(refused({ parameter: 'CL', kind: 'typical', estimate: 1e-320 })).toMatch(/typical CL .*outside the plausible range/);
    expect(refused({ parameter: 'CL', kind: 'covariate', covariate: 'crcl_mL_min', estimate: 1e308 })).toMatch(/implausibly large/);
    // A vanishing additive part of a combined error is accepted: the proportional part b carries the error.
    expect(refused({ parameter: 'a', kind: 'residual', estimate: 1e-300 })).toBe('accepted');
    expect(refused({ parameter: 'a', kind: 'residual', estimate: 0 })).toMatch(/residual a is 0/);
    expect(refused({ parameter: 'CL', kind: 'bsv', estimate: 166 })).toMatch(/implausibly large/);
  });
});
