/** The printed report's individual fits for a large site (renderer/src/features/results/subjectSelection.ts); invented ids and residuals. */
import { describe, expect, it } from 'vitest';
import { byLargestIwres, printedSubjects, PRINT_SUBJECTS_MAX } from '../../../renderer/src/features/results/subjectSelection.js';

describe('printedSubjects', () => {
  it('prints every subject up to the limit, with no note', () => {
    const ids = Array.from({ length: PRINT_SUBJECTS_MAX }, (_, k) => `S${k}`);
    expect(printedSubjects(ids, [])).toEqual({ ids, note: null });
  });

  it('past the limit prints the subjects with the largest |IWRES|, in dataset order, and says so', () => {
    const ids = ['A', 'B', 'C', 'D', 'E'];
    const obs = [
      { subject: 'A', iwres: 0.5 },
      { subject: 'B', iwres: -3.1 },
      { subject: 'B', iwres: 0.2 },
      { subject: 'C', iwres: null },
      { subject: 'D', iwres: 2.4 },
      { subject: 'E', iwres: -0.4 },
    ];
    const s = printedSubjects(ids, obs, 3);
    expect(s.ids).toEqual(['A', 'B', 'D']);
    expect(s.note).toMatch(/Individual fits of 3 of the 5 subjects are printed/);
    expect(s.note).toMatch(/0\.50 or more/);
    expect(s.note).toMatch(/Levels sheet/);
  });

  it('subjects without a residual come last; ties keep dataset order', () => {
    const s = printedSubjects(['A', 'B', 'C', 'D'], [{ subject: 'B', iwres: 1 }, { subject: 'D', iwres: 1 }], 3);
    expect(s.ids).toEqual(['A', 'B', 'D']);
    expect(s.note).toMatch(/Individual fits of 3 of the 4/);
  });

  it('orders subjects for review: largest |IWRES| first, then dataset order, those without residuals last', () => {
    const order = byLargestIwres(['A', 'B', 'C', 'D'], [{ subject: 'C', iwres: -2 }, { subject: 'A', iwres: 1 }, { subject: 'B', iwres: 1 }, { subject: 'B', iwres: NaN }]);
    expect(order.map((o) => o.id)).toEqual(['C', 'A', 'B', 'D']);
    expect(order.map((o) => o.w)).toEqual([2, 1, 1, -1]);
  });
});
