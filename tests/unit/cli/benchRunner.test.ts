import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import { formatTable, formatValue, runBenchmarks } from '../../bench/run.js';

function fixtureDir(): string {
  const dir = mkdtempSync(path.join(tmpdir(), 'plateau-bench-'));
  writeFileSync(path.join(dir, 'a.bench.js'), `export const suite = { name: 'alpha', run: async () => [{ name: 'ops', value: 1234567.8, unit: '/s', target: '>= 1e6' }] };`);
  writeFileSync(path.join(dir, 'b.bench.js'), `export const suite = { name: 'beta', run: async () => { throw new Error('suite broke'); } };`);
  writeFileSync(path.join(dir, 'c.bench.js'), `export const nothing = 1;`);
  writeFileSync(path.join(dir, 'd.bench.js'), `export const suite = { name: 'delta', run: async () => [{ name: 'ratio', value: 2.0012, unit: 'x', note: 'about 2' }] };`);
  writeFileSync(path.join(dir, 'helper.js'), `throw new Error('not a suite; must not be loaded');`);
  return dir;
}

describe('bench runner', () => {
  it('runs every suite, keeps going after a failure, and tabulates figures', async () => {
    const results = await runBenchmarks(fixtureDir(), { json: false, only: [] }, () => undefined);
    expect(results.map((r) => r.suite)).toEqual(['alpha', 'beta', 'c', 'delta']);
    expect(results[1].error).toMatch(/suite broke/);
    expect(results[2].error).toMatch(/does not export `suite`/);
    expect(results[3].figures[0].value).toBe(2.0012);
    const table = formatTable(results);
    const lines = table.trim().split('\n');
    expect(lines[0]).toMatch(/^suite\s+figure\s+value\s+unit\s+target\s+note$/);
    expect(table).toContain('1,234,568');
    expect(table).toContain('>= 1e6');
    expect(table).toMatch(/beta\s+\(failed\)/);
    // Columns line up: every row puts the value column's right edge at the same place.
    const valueEnd = lines[1].split('  ').slice(0, 3).join('  ').length;
    for (const l of lines.slice(2)) if (!l.includes('(failed)')) expect(l.slice(valueEnd - 1, valueEnd)).toMatch(/\d/);
  });

  it('--only filters by suite or file name', async () => {
    const dir = fixtureDir();
    expect((await runBenchmarks(dir, { json: false, only: ['delta'] }, () => undefined)).map((r) => r.suite)).toEqual(['delta']);
    expect((await runBenchmarks(dir, { json: false, only: ['a'] }, () => undefined)).map((r) => r.suite)).toEqual(['alpha']);
  });

  it('formats values readably', () => {
    expect(formatValue(12345678)).toBe('12,345,678');
    expect(formatValue(1.23456)).toBe('1.235');
    expect(formatValue(2.5e-5)).toBe('2.500e-5');
    expect(formatValue(NaN)).toBe('NaN');
  });
});
