/**
 * Seeded random patients (invented, for robustness only): odd but valid inputs must give
 * advice or a located error, never an exception from the numerics; probabilities stay in [0, 1].
 */
import { describe, expect, it } from 'vitest';
import { adviseDose } from '../../../engine/dosing/advise.js';
import { parsePatient } from '../../../engine/dosing/patient.js';
import { populationModelFromSpec } from '../../../engine/dosing/population.js';
import { parseTarget } from '../../../engine/dosing/targets.js';
import { createStreams } from '../../../engine/rng/index.js';
import { parseModelSpec } from '../../../engine/spec/modelSpec.js';

const target = parseTarget({ id: 't', label: 't', source: 'test', goals: [{ metric: 'auc24', min: 400, max: 600 }], toxic: [{ metric: 'trough', max: 20 }], regimen: { strengthMg: 250, minDoseMg: 250, maxDoseMg: 2000, intervalsH: [8, 12, 24], durationsH: [1] } });

const specs = [
  { structure: '1cmt', parameters: { CL: { typical: 3.5, bsv: 0.35 }, V: { typical: 50, bsv: 0.25 } }, residual: { model: 'proportional', b: 0.15 } },
  { structure: '2cmt', parameters: { CL: { typical: 4, bsv: 0.3 }, V1: { typical: 20, bsv: 0.3 }, Q: { typical: 3, bsv: 0.3 }, V2: { typical: 30, bsv: 0.3 } }, correlations: [['CL', 'V1']], correlationValues: { 'CL,V1': 0.5 }, residual: { model: 'log-additive', a: 0.2 } },
  { structure: '1cmt', parameters: { CL: { typical: 3.5, bsv: 0.35 }, V: { typical: 50, bsv: null } }, residual: { model: 'additive', a: 2 } },
].map((s) => populationModelFromSpec(parseModelSpec({ source: 'invented for the robustness test', covariateRanges: {}, ...s })));

describe('random patients', () => {
  it('never throw from the numerics and keep probabilities in [0, 1]', () => {
    const rng = createStreams(77).stream('patients');
    for (let k = 0; k < 12; k++) {
      const nDoses = 1 + rng.int(8);
      const tau = [6, 8, 12, 24][rng.int(4)];
      const doses = Array.from({ length: nDoses }, (_, i) => ({ time_h: i * tau, amount_mg: 250 * (1 + rng.int(8)), duration_h: rng.uniform() < 0.2 ? 0 : 0.5 + rng.int(3) * 0.5 }));
      const last = (nDoses - 1) * tau;
      const nLevels = rng.int(4);
      const levels = Array.from({ length: nLevels }, () => {
        const t = 0.1 + rng.uniform() * (last + tau);
        const extreme = rng.uniform();
        const conc = extreme < 0.15 ? 1e-4 : extreme > 0.9 ? 900 : Math.exp(1 + 2 * rng.normal());
        return rng.uniform() < 0.15 ? { time_h: Number(t.toFixed(2)), censored: true, lloq_mg_L: 2 } : { time_h: Number(t.toFixed(2)), conc_mg_L: conc };
      });
      const patient = parsePatient({ id: `r${k}`, covariates: {}, doses, levels });
      const a = adviseDose({ population: specs[k % specs.length], patient, target, caution: 'c', seed: k, engineVersion: 't', nDraws: 200, overrideBlocks: true });
      for (const r of a.regimens) {
        expect(r.pTarget >= 0 && r.pTarget <= 1).toBe(true);
        expect(r.pToxic! >= 0 && r.pToxic! <= 1).toBe(true);
      }
      expect(a.caution).toBe('c');
      for (const v of Object.values(a.posterior.map)) expect(Number.isFinite(v)).toBe(true);
    }
  }, 60_000);
});
