/**
 * The Dosing view's what-if curves come from the engine run in the renderer. They must be the
 * dose service's curves: rebuilding the posterior with the same model, patient and seed and
 * forecasting the top regimen gives exactly the advice's own forecast (adviseDose).
 */
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { adviseDose } from '../../../engine/dosing/advise.js';
import { parsePatient } from '../../../engine/dosing/patient.js';
import { parseTarget } from '../../../engine/dosing/targets.js';
import { buildWhatIfContext, populationFrom, whatIfForecast } from '../../../renderer/src/features/dosing/whatIf.js';

const json = (p: string) => JSON.parse(readFileSync(new URL(`../../../${p}`, import.meta.url), 'utf8'));

describe('Dosing what-if in the renderer', () => {
  it('reproduces the advice forecast of the top regimen bit for bit (demo patient, demo model)', () => {
    const spec = json('resources/demo/ward-model.json');
    const patientJson = json('resources/demo/patient.json');
    const target = parseTarget(json('resources/targets/vancomycin-auc24.json'));
    const caution = json('resources/cautions/dosing.json').text as string;
    const population = populationFrom({ spec });
    const advice = adviseDose({ population, patient: parsePatient(patientJson), target, caution, seed: 11, engineVersion: 'test', overrideBlocks: true });
    expect(advice.status).toBe('blocked-shown-on-request');
    const top = advice.regimens[0];
    const ctx = buildWhatIfContext(populationFrom({ spec }), patientJson, 11, advice.patient.nextDoseH);
    const fc = whatIfForecast(ctx, { doseMg: top.doseMg, intervalH: top.intervalH, durationH: top.durationH, route: top.route });
    expect(fc.curve.median).toEqual(advice.forecast!.curve.median);
    expect(fc.curve.q975).toEqual(advice.forecast!.curve.q975);
    expect(fc.intervals[0].auc24).toEqual(advice.forecast!.intervals[0].auc24);
  });
});
