/** Canonical dataset -> .xlsx (export) -> import with its template -> the identical dataset. */
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import * as XLSX from 'xlsx';
import { createDataset } from '../../../engine/data/dataset.js';
import { parseCanonicalCsv, writeCanonicalCsv } from '../../../engine/data/canonicalCsv.js';
import { analyseWorkbook } from '../../../engine/import/analyse.js';
import { datasetToCsv, datasetToWorkbook, neutraliseText, reportToCsv, reportToWorkbook, workbookBytes } from '../../../engine/import/export.js';
import { readWorkbook } from '../../../engine/import/workbook.js';
import { createStreams } from '../../../engine/rng/index.js';

// INVENTED dataset for the round trip (no real patients).
function inventedDataset() {
  const rng = createStreams('import-roundtrip').stream('data');
  const subjects = [];
  for (let i = 0; i < 25; i++) {
    const doses = [];
    const observations = [];
    let t = rng.uniform() * 0.3; // first event need not be at 0
    for (let k = 0; k < 4; k++) {
      const route = (['bolus', 'infusion', 'oral'] as const)[(i + k) % 3];
      doses.push({ timeH: t, amountMg: Math.round(rng.uniform() * 2000) / 1 + 0.1 * k, route, durationH: route === 'infusion' ? 0.5 + rng.uniform() : 0, ...(k === 0 && i % 4 === 0 ? { steadyStateIntervalH: 12 } : {}) });
      observations.push(i % 5 === 0 && k === 3 ? { timeH: t + 11.9, valueMgL: 0.5, censored: true, lloqMgL: 0.5 } : { timeH: t + 0.1 + rng.uniform() * 11, valueMgL: rng.uniform() * 40, censored: false, ...(k % 2 ? { lloqMgL: 0.25 } : {}) });
      t += 12 + rng.uniform() * 1e-6;
    }
    subjects.push({ id: `RT-${String(i).padStart(3, '0')}`, covariates: { weightKg: 40 + rng.uniform() * 80, sex: i % 2 ? 'F' : 'M', ward: `ward ${i % 3}`, ['__proto__']: 1.5, constructor: 'c' }, doses, observations });
  }
  return createDataset(subjects);
}

describe('round trip through .xlsx', () => {
  it('gives back the identical dataset', () => {
    const ds = inventedDataset();
    expect(ds.covariateNames).toContain('__proto__');
    const { workbook, template } = datasetToWorkbook(ds);
    const bytes = workbookBytes(workbook);
    const a = analyseWorkbook(bytes, { mapping: JSON.parse(JSON.stringify(template)) });
    expect(a.report.problems.filter((p) => p.severity === 'error')).toEqual([]);
    expect(a.dataset).toBeDefined();
    // sourceRow differs by design (rows of the new file); compare everything else.
    const strip = (d: typeof ds) =>
      d.subjects.map((s) => ({
        id: s.id,
        covariates: { ...s.covariates },
        doses: s.doses.map(({ sourceRow: _r, ...x }) => x),
        observations: s.observations.map(({ sourceRow: _r, ...x }) => x),
      }));
    expect(strip(a.dataset!)).toEqual(strip(ds));
    expect(a.dataset!.covariateNames).toEqual(ds.covariateNames);
    expect(Object.getPrototypeOf(a.dataset!.subjects[0].covariates)).toBeNull();
    // And on to the canonical CSV and back.
    expect(strip(parseCanonicalCsv(writeCanonicalCsv(a.dataset!)))).toEqual(strip(ds));
  });
});

describe('canonical CSV through the spreadsheet path', () => {
  it('imports with the suggested mapping to the same dataset', () => {
    const ds = createDataset(inventedDataset().subjects.map((s) => ({ id: s.id, covariates: { weightKg: s.covariates.weightKg as number }, doses: [...s.doses], observations: [...s.observations] })));
    const a = analyseWorkbook(new TextEncoder().encode(writeCanonicalCsv(ds)));
    expect(a.report.problems.filter((p) => p.severity === 'error')).toEqual([]);
    const roles = a.mapping.sheets[0].columns.map((c) => `${c.header}:${c.role}`);
    expect(roles).toContain('censored:censoredFlag');
    const strip = (d: typeof ds) => d.subjects.map((s) => ({ id: s.id, doses: s.doses.map(({ sourceRow: _r, ...x }) => x), observations: s.observations.map(({ sourceRow: _r, ...x }) => x) }));
    expect(strip(a.dataset!)).toEqual(strip(ds));
  });
});

describe('export neutralises formulas', () => {
  it('prefixes text starting with = + - @ and keeps negative numbers as numbers', () => {
    expect(['=1+1', '+A1', '-2+3', '@SUM(A1)', 'ok', '\tX'].map(neutraliseText)).toEqual(["'=1+1", "'+A1", "'-2+3", "'@SUM(A1)", 'ok', "'\tX"]);
    const ds = createDataset([
      { id: '=HYPERLINK("http://x")', covariates: { note: '@cmd', shift: -3 }, doses: [{ timeH: 0, amountMg: 100, route: 'bolus', durationH: 0 }], observations: [{ timeH: 1, valueMgL: 2, censored: false }] },
    ]);
    const csv = datasetToCsv(ds);
    expect(csv).toContain(`"'=HYPERLINK(""http://x"")"`);
    expect(csv).toContain("'@cmd");
    expect(csv).toMatch(/,-3\r\n/);
    const wb = readWorkbook(workbookBytes(datasetToWorkbook(ds).workbook));
    const pts = wb.sheets.find((s) => s.name === 'Patients')!;
    expect(pts.rows[1][0]).toMatchObject({ kind: 'text', raw: `'=HYPERLINK("http://x")` });
    expect(pts.rows[1].find((c) => c?.kind === 'number')).toMatchObject({ raw: -3 });
  });

  it('writes the report as .xlsx and .csv', () => {
    const report = {
      mapping: datasetToWorkbook(createDataset([{ id: 'a', doses: [{ timeH: 0, amountMg: 1, route: 'bolus' as const, durationH: 0 }], observations: [] }])).template,
      summary: { patients: 1, doses: 1, levels: 0, censored: 0, excludedRows: 1 },
      problems: [{ sheet: 'S', row: 3, column: 'B (Dose)', value: '=evil()', severity: 'error' as const, message: 'the dose amount is negative' }],
      excluded: [{ sheet: 'S', row: 3, reason: 'the dose amount is negative' }],
      notes: ['Times are taken as written.'],
    };
    const csv = reportToCsv(report);
    expect(csv.split('\r\n')[1]).toBe("S,3,B (Dose),'=evil(),error,the dose amount is negative");
    const wb = XLSX.read(workbookBytes(reportToWorkbook(report)), { type: 'array' });
    expect(wb.SheetNames).toEqual(['Summary', 'Problems', 'Excluded rows', 'Notes']);
    expect(wb.Sheets['Problems']['D2'].v).toBe("'=evil()");
    expect(wb.Sheets['Problems']['D2'].f).toBeUndefined();
  });
});

describe('the demo dataset (resources/demo/ward-levels.csv) keeps every covariate', () => {
  const file = new URL('../../../resources/demo/ward-levels.csv', import.meta.url);
  const text = readFileSync(file, 'utf8');
  const strip = (d: ReturnType<typeof parseCanonicalCsv>) =>
    d.subjects.map((s) => ({ id: s.id, covariates: { ...s.covariates }, doses: s.doses.map(({ sourceRow: _r, ...x }) => x), observations: s.observations.map(({ sourceRow: _r, ...x }) => x) }));

  it('canonical -> .xlsx -> import with its template -> identical, covariates included', () => {
    const ds = parseCanonicalCsv(text);
    expect(ds.covariateNames).toEqual(['weight_kg', 'crcl_mL_min', 'age_y', 'sex']);
    const { workbook, template } = datasetToWorkbook(ds);
    const a = analyseWorkbook(workbookBytes(workbook), { mapping: JSON.parse(JSON.stringify(template)) });
    expect(a.report.problems.filter((p) => p.severity === 'error')).toEqual([]);
    expect(a.dataset!.covariateNames).toEqual(ds.covariateNames);
    expect(strip(a.dataset!)).toEqual(strip(ds));
  });

  it('imported as a spreadsheet with the suggested mapping, then exported and imported again: identical', () => {
    const ds = parseCanonicalCsv(text);
    const a = analyseWorkbook(new TextEncoder().encode(text));
    expect(a.report.problems.filter((p) => p.severity === 'error')).toEqual([]);
    expect(a.dataset!.covariateNames).toEqual(ds.covariateNames);
    expect(strip(a.dataset!)).toEqual(strip(ds));
    const { workbook, template } = datasetToWorkbook(a.dataset!);
    const b = analyseWorkbook(workbookBytes(workbook), { mapping: JSON.parse(JSON.stringify(template)) });
    expect(strip(b.dataset!)).toEqual(strip(ds));
  });
});
