import { describe, expect, it } from 'vitest';
import { childPath, editDistance, nearestKey, unknownKeyProblems } from '../../../engine/json/knownKeys.js';

describe('known keys', () => {
  it('edit distance counts insertions, deletions, substitutions and adjacent swaps (optimal string alignment, common practice)', () => {
    expect(editDistance('duraton_h', 'duration_h')).toBe(1);
    expect(editDistance('bvs', 'bsv')).toBe(1);
    expect(editDistance('level', 'levels')).toBe(1);
    expect(editDistance('', 'abc')).toBe(3);
    expect(editDistance('kitten', 'sitting')).toBe(3);
  });

  it('names the nearest known key, or none when nothing is close', () => {
    expect(nearestKey('duraton_h', ['time_h', 'amount_mg', 'duration_h', 'route'])).toBe('duration_h');
    expect(nearestKey('Levels', ['doses', 'levels'])).toBe('levels');
    expect(nearestKey('zzzzzzzz', ['doses', 'levels'])).toBeUndefined();
  });

  it('reports each unknown key with its JSON path', () => {
    const problems = unknownKeyProblems({ time_h: 0, duraton_h: 1.5, 'odd key': 1 }, ['time_h', 'duration_h'], 'doses[0]');
    expect(problems).toEqual([
      'doses[0].duraton_h: unknown key (did you mean "duration_h"?)',
      'doses[0]["odd key"]: unknown key (known keys: time_h, duration_h)',
    ]);
    expect(childPath('', 'levels')).toBe('levels');
  });

  it('treats prototype keys as unknown', () => {
    const obj = JSON.parse('{"__proto__": {"x": 1}, "constructor": 1}') as Record<string, unknown>;
    expect(unknownKeyProblems(obj, ['constructor'])).toHaveLength(2);
  });
});
