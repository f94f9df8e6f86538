import { describe, expect, it } from 'vitest';
import { cvFromLogSd, duration, MISSING, percent, pct100, sig, withUnit } from '../../../renderer/src/lib/format/numbers.js';

describe('renderer number formatting', () => {
  it('shows significant digits, not decimals', () => {
    expect(sig(1234.5, 3)).toBe('1230');
    expect(sig(12.345, 3)).toBe('12.3');
    expect(sig(0.012345, 3)).toBe('0.0123');
    expect(sig(4, 3)).toBe('4.00');
    expect(sig(0)).toBe('0');
    expect(sig(NaN)).toBe(MISSING);
    expect(sig(null)).toBe(MISSING);
    expect(sig(9.996, 3)).toBe('10.0');
  });
  it('keeps the unit with the value and drops it for a missing value', () => {
    expect(withUnit(18.44, 'mg/L')).toBe('18.4 mg/L');
    expect(withUnit(undefined, 'mg/L')).toBe(MISSING);
  });
  it('shows probabilities as percentages without claiming 0 or 100 when not', () => {
    expect(percent(0.5)).toBe('50 %');
    expect(percent(0.004)).toBe('< 1 %');
    expect(percent(0.996)).toBe('> 99 %');
    expect(percent(1)).toBe('100 %');
    expect(pct100(12.34)).toBe('12 %');
    expect(pct100(3.456)).toBe('3.5 %');
  });
  it('formats durations', () => {
    expect(duration(5.4)).toBe('5 s');
    expect(duration(185)).toBe('3 min 05 s');
    expect(duration(3720)).toBe('1 h 02 min');
  });
  it('CV of a log-normal effect: sqrt(exp(omega^2) - 1) (common practice)', () => {
    expect(cvFromLogSd(0.3)).toBeCloseTo(100 * Math.sqrt(Math.exp(0.09) - 1), 10);
  });
});
