import { describe, expect, it } from 'vitest';
import { DEFAULT_SAEM_SETTINGS, parseSaemSettings, resolveChains } from '../../../engine/saem/settings.js';
import { SpecError } from '../../../engine/spec/modelSpec.js';

describe('parseSaemSettings', () => {
  it('fills documented defaults', () => {
    expect(parseSaemSettings({})).toEqual(DEFAULT_SAEM_SETTINGS);
    expect(resolveChains(DEFAULT_SAEM_SETTINGS, 12)).toBe(5);
    expect(resolveChains(DEFAULT_SAEM_SETTINGS, 1000)).toBe(4); // at least 4 per subject (settings.ts: sparse-data evidence)
  });
  it('applies values and overrides', () => {
    const s = parseSaemSettings({ chains: 3, averagingIterations: 50 }, { seed: 9 });
    expect([s.chains, s.averagingIterations, s.seed]).toEqual([3, 50, 9]);
  });
  it('reports every bad key with its JSON path', () => {
    try {
      parseSaemSettings({ chains: 0, stepExponent: 0.2, bogus: 1, searchMinIterations: 900 });
      throw new Error('no error');
    } catch (e) {
      expect(e).toBeInstanceOf(SpecError);
      const text = (e as SpecError).problems.join('\n');
      expect(text).toContain('estimation.chains');
      expect(text).toContain('estimation.stepExponent');
      expect(text).toContain('estimation.bogus: unknown estimator setting');
      expect(text).toContain('estimation.searchMinIterations: 900 exceeds');
    }
  });
});
