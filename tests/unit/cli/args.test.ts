import { describe, expect, it } from 'vitest';
import { booleanFlag, listFlag, numberFlag, parseArgs, stringFlag } from '../../../main/cli/args.js';
import { UsageError } from '../../../main/cli/types.js';

const specs = {
  model: { type: 'string' as const, required: true },
  json: { type: 'boolean' as const },
  level: { type: 'string' as const, multiple: true },
  out: { type: 'string' as const, short: 'o' },
  seed: { type: 'string' as const },
};

describe('parseArgs', () => {
  it('reads --flag value, --flag=value, booleans, repeated flags and short aliases', () => {
    const a = parseArgs(['--model', 'm.json', '--json', '--level=1', '--level', '2', '-o', 'x.csv', '--seed=-3'], specs);
    expect(stringFlag(a, 'model')).toBe('m.json');
    expect(booleanFlag(a, 'json')).toBe(true);
    expect(listFlag(a, 'level')).toEqual(['1', '2']);
    expect(stringFlag(a, 'out')).toBe('x.csv');
    expect(numberFlag(a, 'seed', { integer: true })).toBe(-3);
    expect(a.help).toBe(false);
  });

  it('accepts a negative number as a value', () => {
    const a = parseArgs(['--model', 'm', '--seed', '-5'], specs);
    expect(stringFlag(a, 'seed')).toBe('-5');
  });

  it('rejects an unknown flag with the usage attached and the known flags listed', () => {
    try {
      parseArgs(['--model', 'm', '--modle', 'x'], specs, { usage: 'usage: test' });
      expect.unreachable();
    } catch (e) {
      expect(e).toBeInstanceOf(UsageError);
      expect((e as UsageError).message).toContain('unknown option --modle');
      expect((e as UsageError).message).toContain('--model');
      expect((e as UsageError).usage).toBe('usage: test');
    }
  });

  it('rejects a missing value, a missing required flag, a repeated single flag and stray positionals', () => {
    expect(() => parseArgs(['--model'], specs)).toThrow(/--model needs a value/);
    expect(() => parseArgs(['--model', '--json'], specs)).toThrow(/--model needs a value/);
    expect(() => parseArgs(['--json'], specs)).toThrow(/--model is required/);
    expect(() => parseArgs(['--model', 'a', '--model', 'b'], specs)).toThrow(/given twice/);
    expect(() => parseArgs(['--model', 'a', 'extra'], specs)).toThrow(/unexpected argument "extra"/);
    expect(() => parseArgs(['--model', 'a', '--json=maybe'], specs)).toThrow(/is a switch/);
    expect(() => parseArgs(['--model', 'a', '-x'], specs)).toThrow(/unknown option -x/);
  });

  it('--help skips the required checks', () => {
    expect(parseArgs(['--help'], specs).help).toBe(true);
  });

  it('does not treat prototype keys as known flags', () => {
    expect(() => parseArgs(['--constructor', 'x'], { json: { type: 'boolean' } })).toThrow(/unknown option --constructor/);
    expect(() => parseArgs(['--toString'], {})).toThrow(/takes no options/);
  });

  it('numberFlag names the flag on bad numbers', () => {
    const a = parseArgs(['--model', 'm', '--seed', '1.5'], specs);
    expect(() => numberFlag(a, 'seed', { integer: true })).toThrow(/--seed must be an integer, got "1.5"/);
    const b = parseArgs(['--model', 'm', '--seed', 'abc'], specs);
    expect(() => numberFlag(b, 'seed')).toThrow(/--seed must be a number/);
  });
});
