/**
 * The committed fixture workbooks (INVENTED DATA, made by tests/fixtures/import/make_fixtures.ts):
 * every planted problem is found at its row, the counts match, spot values are right.
 */
import { readFileSync } from 'node:fs';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { analyseWorkbook } from '../../../engine/import/analyse.js';
import type { FixtureSpec } from '../../fixtures/import/make_fixtures.js';

const dir = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '../../fixtures/import');
const expected = JSON.parse(readFileSync(path.join(dir, 'expected.json'), 'utf8')) as { fixtures: FixtureSpec[] };
const load = (file: string) => new Uint8Array(readFileSync(path.join(dir, file)));

describe.each(expected.fixtures.map((f) => [f.file, f] as const))('fixture %s', (_file, spec) => {
  const analysis = analyseWorkbook(load(spec.file), { options: spec.options });
  const report = analysis.report;

  it('reports the expected counts', () => {
    expect(report.summary).toEqual(spec.summary);
  });

  it.each(spec.planted.map((p) => [`${p.what} (${p.sheet} row ${p.row})`, p] as const))('finds %s', (_what, p) => {
    if (p.severity === 'excluded') {
      const x = report.excluded.filter((e) => e.sheet === p.sheet && e.row === p.row);
      expect(x.map((e) => e.reason.toLowerCase()).join(' | ')).toContain(p.includes.toLowerCase());
      expect(report.problems.filter((q) => q.sheet === p.sheet && q.row === p.row && q.severity === 'error')).toEqual([]);
    } else {
      const found = report.problems.filter((q) => q.sheet === p.sheet && q.row === p.row && q.severity === p.severity);
      expect(found.map((q) => q.message).join(' | ')).toContain(p.includes);
      if (p.severity === 'error') expect(report.excluded.some((e) => e.sheet === p.sheet && e.row === p.row)).toBe(true);
    }
  });

  it('has no error that was not planted', () => {
    const plantedRows = new Set(spec.planted.filter((p) => p.severity === 'error').map((p) => `${p.sheet}:${p.row}`));
    const stray = report.problems.filter((q) => q.severity === 'error' && q.row > 0 && !plantedRows.has(`${q.sheet}:${q.row}`));
    expect(stray).toEqual([]);
  });

  it('places events and covariates right', () => {
    for (const c of spec.checks) {
      const s = analysis.dataset!.subjects.find((x) => x.id === c.patient)!;
      const rec = c.kind === 'dose' ? s.doses[c.index] : s.observations[c.index];
      expect(rec, `${c.patient} ${c.kind} ${c.index}`).toBeDefined();
      if (c.timeH !== undefined) expect(rec.timeH).toBeCloseTo(c.timeH, 9);
      if (c.valueMgL !== undefined) expect((rec as { valueMgL: number }).valueMgL).toBeCloseTo(c.valueMgL, 9);
      if (c.durationH !== undefined) expect((rec as { durationH: number }).durationH).toBeCloseTo(c.durationH, 9);
      if (c.censored !== undefined) expect((rec as { censored: boolean }).censored).toBe(c.censored);
    }
    for (const c of spec.covariates) {
      const s = analysis.dataset!.subjects.find((x) => x.id === c.patient)!;
      if (typeof c.value === 'number') expect(s.covariates[c.name] as number).toBeCloseTo(c.value, 2);
      else expect(s.covariates[c.name]).toBe(c.value);
    }
  });

  it('re-imports with its own saved mapping to the same result', () => {
    const again = analyseWorkbook(load(spec.file), { mapping: JSON.parse(JSON.stringify(analysis.mapping)) });
    expect(again.report.summary).toEqual(report.summary);
    expect(again.dataset).toEqual(analysis.dataset);
  });
});

describe('date order', () => {
  it('an explicit choice resolves dates that fit both orders', () => {
    const a = analyseWorkbook(load('ambiguous_dates.csv'), { options: { dateOrder: 'dayFirst' } });
    expect(a.report.problems.filter((p) => p.severity === 'error')).toEqual([]);
    const s = a.dataset!.subjects[0];
    // 03/04 08:00 -> 05/04 08:00 read day-first: 48 h
    expect(s.doses.map((d) => d.timeH)).toEqual([0, 48]);
    const b = analyseWorkbook(load('ambiguous_dates.csv'), { options: { dateOrder: 'monthFirst' } });
    // read month-first: 4 March -> 4 May is 31 + 30 days
    expect(b.dataset!.subjects[0].doses[1].timeH).toBe((31 + 30) * 24);
  });

  it('the two-sheet fixture without a choice is read day-first because the file decides it', () => {
    const a = analyseWorkbook(load('ward7b_two_sheets.xlsx'));
    expect(a.report.notes.join(' ')).toContain('day-first (decided from the file)');
    expect(a.mapping.options.dateOrder).toBe('dayFirst');
  });
});
