/**
 * Levels the structural models cannot explain: every PK model predicts 0 before the first dose
 * and without any dose (common practice: no endogenous baseline in these models).
 */
import { describe, expect, it } from 'vitest';
import { createDataset, type SubjectInput } from '../../../engine/data/dataset.js';
import { parseModelSpec } from '../../../engine/spec/modelSpec.js';
import { compileModel, ModelDataError } from '../../../engine/stats/model.js';

const subject = (id: string, preDose: number | null): SubjectInput => ({
  id,
  doses: [{ timeH: 1, amountMg: 100, route: 'bolus', durationH: 0 }],
  observations: [
    ...(preDose === null ? [] : [{ timeH: 0, valueMgL: preDose, censored: false, sourceRow: 2 }]),
    { timeH: 3, valueMgL: 2, censored: false },
    { timeH: 8, valueMgL: 1, censored: false },
  ],
});
const spec = (residual: Record<string, unknown>) =>
  parseModelSpec({ structure: '1cmt', parameters: { CL: { typical: 5, bsv: 0.3 }, V: { typical: 50, bsv: 0.2 } }, residual });

describe('levels where the model predicts 0', () => {
  const data = createDataset([subject('A', 0.4), subject('B', null), subject('C', 0)]);

  it('refuses proportional error for a level above 0 before the first dose, naming subject and row', () => {
    expect(() => compileModel(spec({ model: 'proportional', b: 0.1 }), data)).toThrow(ModelDataError);
    expect(() => compileModel(spec({ model: 'proportional', b: 0.1 }), data)).toThrow(/subject A.*0\.4 mg\/L at 0 h \(row 2\).*proportional/s);
  });

  it('accepts additive or combined error with one warning that lists the subjects', () => {
    const m = compileModel(spec({ model: 'combined', a: 0.1, b: 0.1 }), data);
    const w = m.warnings.filter((x) => /before their first dose/.test(x));
    expect(w).toHaveLength(1);
    expect(w[0]).toMatch(/^1 subject\(s\).*subject A: 0\.4 mg\/L/);
  });

  it('refuses a subject with levels and no dose', () => {
    const noDose = createDataset([subject('A', null), { id: 'Z', doses: [], observations: [{ timeH: 2, valueMgL: 1, censored: false }] }]);
    expect(() => compileModel(spec({ model: 'additive', a: 0.5 }), noDose)).toThrow(/subject Z.*no dose rows/s);
  });
});
