/** The ODE solver tolerances are settings of the model spec (`solver`), bound to the model. */
import { describe, expect, it } from 'vitest';
import { structuralModelWithSolver } from '../../../engine/models/catalogue.js';
import { parseModelSpec, SpecError } from '../../../engine/spec/modelSpec.js';

const mm = (solver?: unknown) =>
  parseModelSpec({
    structure: '1cmt-mm',
    parameters: { Vmax: { typical: 50 }, Km: { typical: 5 }, V: { typical: 40 } },
    residual: { model: 'additive', a: 1 },
    ...(solver === undefined ? {} : { solver }),
  });

describe('solver settings in the model spec', () => {
  it('parses relTol, absTol and maxSteps and refuses bad or unknown keys with their path', () => {
    expect(mm({ relTol: 1e-4, absTol: 1e-6, maxSteps: 5000 }).solver).toEqual({ relTol: 1e-4, absTol: 1e-6, maxSteps: 5000 });
    expect(() => mm({ relTol: 2 })).toThrow(/solver\.relTol/);
    expect(() => mm({ step: 1 })).toThrow(SpecError);
  });

  it('a loose tolerance changes Michaelis-Menten predictions a little, a tight one matches the default', () => {
    const doses = [{ timeH: 0, amountMg: 1000, route: 'bolus' as const, durationH: 0 }];
    const times = [1, 4, 12, 24];
    const params = Float64Array.from([50, 5, 40, Number.NaN, 0, 1]);
    const run = (solver?: Record<string, number>) => {
      const out = new Float64Array(times.length);
      expect(structuralModelWithSolver('1cmt-mm', solver).prepare(doses, times)(params, out)).toBe(true);
      return out;
    };
    const reference = run();
    const tight = run({ relTol: 1e-10, absTol: 1e-12 });
    const loose = run({ relTol: 1e-2, absTol: 1e-2 });
    for (let k = 0; k < times.length; k++) {
      expect(Math.abs(tight[k] / reference[k] - 1)).toBeLessThan(1e-7);
      expect(Math.abs(loose[k] / reference[k] - 1)).toBeLessThan(0.05);
    }
    expect(Array.from(loose)).not.toEqual(Array.from(reference));
  });
});
