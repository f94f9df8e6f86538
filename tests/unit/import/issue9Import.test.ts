/**
 * Issue 9, finding 8, and issue 11, finding 3 (a row with only an id and a time), reproduced
 * from resources/demo/ward-levels.csv made into a ward export (header "subject" renamed
 * "Patient", so the spreadsheet import reads it, not the canonical reader).
 */
import { describe, expect, it } from 'vitest';
import { analyseWorkbook } from '../../../engine/import/analyse.js';
import { parseTemplate, TemplateError } from '../../../engine/import/roles.js';
import { groupProblems, describePlace } from '../../../engine/import/group.js';
import { demoText } from '../../fuzz/corpus.js';

const enc = (t: string) => new TextEncoder().encode(t);

/** The demo as an export: rows as arrays, header first. */
function exportRows(): string[][] {
  const rows = demoText().trimEnd().split('\n').map((l) => l.split(','));
  rows[0][0] = 'Patient';
  return rows;
}
const toCsv = (rows: string[][]) => rows.map((r) => r.join(',')).join('\n') + '\n';
const col = (rows: string[][], name: string) => rows[0].indexOf(name);

describe('"<x" against the row\'s own censored flag and LLOQ', () => {
  const rows = exportRows();
  const k = rows.findIndex((r, i) => i > 0 && r[col(rows, 'event')] === 'level' && r[col(rows, 'censored')] === '0' && r[col(rows, 'lloq_mg_L')] === '2');

  it('"<0.5" with censored = 0 is an error (it silently overrode the flag)', () => {
    const r = rows.map((x) => [...x]);
    r[k][col(r, 'conc_mg_L')] = '<0.5';
    const a = analyseWorkbook(enc(toCsv(r)));
    const errors = a.report.problems.filter((p) => p.severity === 'error');
    expect(errors.length).toBe(1);
    expect(errors[0]).toMatchObject({ row: k + 1 });
    expect(errors[0].message).toMatch(/censored flag says it was measured/);
  });

  it('"<0.5" with LLOQ 2 and no flag is reported, and the stated limit used', () => {
    const r = rows.map((x) => [...x]);
    r[k][col(r, 'conc_mg_L')] = '<0.5';
    r[k][col(r, 'censored')] = '';
    const a = analyseWorkbook(enc(toCsv(r)));
    const w = a.report.problems.filter((p) => p.row === k + 1);
    expect(w.length).toBe(1);
    expect(w[0].severity).toBe('warning');
    expect(w[0].message).toMatch(/below 0.5 but the row's LLOQ is 2/);
  });
});

describe('units in headers', () => {
  it('"Infusion (min)" is the infusion duration in minutes, converted to hours', () => {
    const r = exportRows();
    const d = col(r, 'duration_h');
    r[0][d] = 'Infusion (min)';
    for (let i = 1; i < r.length; i++) if (r[i][d] !== '') r[i][d] = String(Number(r[i][d]) * 60);
    const a = analyseWorkbook(enc(toCsv(r)));
    expect(a.report.problems.filter((p) => p.severity === 'error')).toEqual([]);
    const m = a.mapping.sheets[0].columns.find((c) => c.header === 'Infusion (min)');
    expect(m).toMatchObject({ role: 'infusionDuration', unit: 'min' });
    const first = a.dataset!.subjects[0].doses[0];
    expect(first.durationH).toBeCloseTo(1.5, 12); // the demo's first dose: 1.5 h
  });
});

describe('a problem on many rows is one line, and points to the options that exist', () => {
  it('a missing route on every dose row: one line with the count and the rows, naming --default-route', () => {
    const r = exportRows();
    const rc = col(r, 'route');
    const dc = col(r, 'duration_h');
    for (const row of r) row.splice(Math.max(rc, dc), 1), row.splice(Math.min(rc, dc), 1);
    const a = analyseWorkbook(enc(toCsv(r)));
    const errors = a.report.problems.filter((p) => p.severity === 'error');
    expect(errors.filter((p) => /route is missing/.test(p.message)).length).toBe(278); // every dose row of the demo
    // Two lines in all: the route, once, and that no usable row is left (levels of patients whose doses were refused are listed as excluded).
    const lines = groupProblems(errors);
    expect(lines.length).toBe(2);
    const route = lines.find((l) => /route is missing/.test(l.message))!;
    expect(route.message).toMatch(/--default-route/);
    expect(route.message).not.toMatch(/defaultRoute in the mapping/);
    expect(describePlace(route)).toMatch(/278 rows \(\d+-\d+, /);
  });
});

describe('a row with only a patient id and a time', () => {
  it('is reported, not dropped', () => {
    const r = exportRows();
    const k = r.findIndex((x, i) => i > 0 && x[col(r, 'event')] === 'level');
    const only = r[0].map((_, j) => (j === 0 ? r[k][0] : j === col(r, 'time_h') ? '100' : ''));
    r.splice(k + 1, 0, only);
    const a = analyseWorkbook(enc(toCsv(r)));
    const errors = a.report.problems.filter((p) => p.severity === 'error');
    expect(errors.length).toBe(1);
    expect(errors[0]).toMatchObject({ row: k + 2 });
    expect(errors[0].message).toMatch(/neither a dose amount nor a level/);
  });
});

describe('mapping templates are strict', () => {
  it('an unknown key is named with its path and the nearest known key', () => {
    const t = { format: 'plateau-import-mapping', version: 1, sheets: [{ sheet: 'S', content: 'events', headerRow: 1, columns: [{ role: 'patientId', header: 'P', colum: 'A' }] }], options: { defaultRout: 'oral' } };
    let problems: string[] = [];
    try {
      parseTemplate(t);
    } catch (e) {
      problems = (e as TemplateError).problems;
    }
    expect(problems).toContain('$.sheets[0].columns[0].colum: unknown key (did you mean "column"?)');
    expect(problems).toContain('$.options.defaultRout: unknown key (did you mean "defaultRoute"?)');
  });
});

describe('any unit in a header is read and converted, or named when unknown', () => {
  it('"Age (months)" is converted to years; "Weight (st)" is an error, not kilograms', () => {
    const r = exportRows();
    const a = col(r, 'age_y');
    r[0][a] = 'Age (months)';
    for (let i = 1; i < r.length; i++) r[i][a] = String(Number(r[i][a]) * 12);
    const res = analyseWorkbook(enc(toCsv(r)));
    expect(res.report.problems.filter((p) => p.severity === 'error')).toEqual([]);
    expect(res.dataset!.subjects[0].covariates.age_y).toBeCloseTo(57, 9); // the demo's first patient: 57 years
    const w = exportRows();
    w[0][col(w, 'weight_kg')] = 'Weight (st)';
    const bad = analyseWorkbook(enc(toCsv(w)));
    const errors = bad.report.problems.filter((p) => p.severity === 'error');
    expect(errors.length).toBeGreaterThan(0);
    expect(errors.some((e) => /unknown weight unit "st"/.test(e.message))).toBe(true);
  });
});
