import { describe, expect, it } from 'vitest';
import { estimateRows } from '../../../renderer/src/features/results/estimates.js';

describe('Results estimates table', () => {
  it('labels, units, CV % of a log-normal BSV and shrinkage in percent', () => {
    const rows = estimateRows({
      spec: { parameters: { CL: { transform: 'log' }, V: { transform: 'log' } }, residual: { model: 'combined' } },
      population: [
        { parameter: 'CL', kind: 'typical', estimate: 4.2, fixed: false, se: 0.2, rsePercent: 4.8 },
        { parameter: 'CL', kind: 'bsv', estimate: 0.3, fixed: false, se: 0.03, rsePercent: 10 },
        { parameter: 'a', kind: 'residual', estimate: 0.5, fixed: false },
        { parameter: 'b', kind: 'residual', estimate: 0.1, fixed: false },
      ],
      shrinkage: { eta: { CL: { sd: 0.12 } } },
    });
    expect(rows[0]).toMatchObject({ label: 'CL (typical value)', unit: 'L/h', se: 0.2, rsePercent: 4.8 });
    // CV = sqrt(exp(omega^2) - 1) for a log-normal random effect (common practice).
    expect(rows[1].cvPercent).toBeCloseTo(100 * Math.sqrt(Math.exp(0.09) - 1), 12);
    expect(rows[1].shrinkagePercent).toBeCloseTo(12, 12);
    expect(rows[2]).toMatchObject({ label: 'residual, additive SD', unit: 'mg/L', se: null });
    expect(rows[3].label).toBe('residual, proportional (fraction)');
  });
});
