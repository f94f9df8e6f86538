import { describe, expect, it } from 'vitest';
import { getStructuralModel, listStructuralModels } from '../../../engine/models/catalogue.js';
import { ABSORPTION_PARAMETERS, STRUCTURE_PARAMETERS } from '../../../engine/spec/modelSpec.js';

describe('catalogue', () => {
  it('every model: disposition parameters of the spec, then ka, tlag, F, each described', () => {
    for (const m of listStructuralModels()) {
      expect(m.parameterOrder).toEqual([...STRUCTURE_PARAMETERS[m.id], ...ABSORPTION_PARAMETERS]);
      expect(m.parameters.map((p) => p.name)).toEqual(m.parameterOrder);
      for (const p of m.parameters) {
        expect(p.description.length).toBeGreaterThan(3);
        expect(p.transforms.length).toBeGreaterThan(0);
        expect(Number.isFinite(p.defaultInitial) && p.defaultInitial > 0).toBe(true);
      }
      expect(m.parameters.find((p) => p.name === 'tlag')?.defaultWhenAbsent).toBe(0);
      expect(m.parameters.find((p) => p.name === 'F')?.defaultWhenAbsent).toBe(1);
      expect(m.parameters.find((p) => p.name === 'ka')?.defaultWhenAbsent).toBeUndefined();
      expect(m.equation).not.toMatch(/\n/);
      expect(m.sketch.length).toBeGreaterThan(20);
      expect(getStructuralModel(m.id)).toBe(m);
    }
  });
  it('default initial values predict finite positive levels for a mixed history', () => {
    for (const m of listStructuralModels()) {
      const p = m.prepare(
        [
          { timeH: 0, amountMg: 500, route: 'infusion', durationH: 1 },
          { timeH: 12, amountMg: 250, route: 'oral', durationH: 0 },
        ],
        [1, 13, 24],
      );
      const out = new Float64Array(3);
      expect(p(Float64Array.from(m.parameters.map((x) => x.defaultInitial)), out)).toBe(true);
      for (const c of out) expect(c > 0 && Number.isFinite(c)).toBe(true);
    }
  });
});
