/**
 * No silent loss: date-time "time" columns, every row accounted for, unrecognised columns as
 * covariates under canonical names, CrCl derived by Cockcroft-Gault. INVENTED rows throughout.
 */
import { readFileSync } from 'node:fs';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import * as XLSX from 'xlsx';
import { analyseWorkbook } from '../../../engine/import/analyse.js';
import { canonicalCovariateName, suggestMapping, type MappingTemplate } from '../../../engine/import/roles.js';
import { readWorkbook } from '../../../engine/import/workbook.js';
import { workbookBytes } from '../../../engine/import/export.js';
import { formatSeconds } from '../../../main/services/importService.js';

type V = string | number | null | { serial: number; z: string };
const serial = (y: number, m: number, d: number, H = 0, M = 0) => (Date.UTC(y, m - 1, d, H, M) - Date.UTC(1899, 11, 30)) / 86_400_000;

function book(sheets: Record<string, V[][]>): Uint8Array {
  const wb = XLSX.utils.book_new();
  for (const [name, rows] of Object.entries(sheets)) {
    const ws = XLSX.utils.aoa_to_sheet(rows.map((r) => r.map((v) => (v !== null && typeof v === 'object' ? null : v))));
    rows.forEach((r, i) =>
      r.forEach((v, j) => {
        if (v !== null && typeof v === 'object') ws[XLSX.utils.encode_cell({ r: i, c: j })] = { t: 'n', v: v.serial, z: v.z };
      }),
    );
    XLSX.utils.book_append_sheet(wb, ws, name);
  }
  return workbookBytes(wb);
}

const dt = (d: number, H: number, M = 0): V => ({ serial: serial(2024, 5, d, H, M), z: 'dd/mm/yyyy hh:mm' });
const DOSES: V[][] = [
  ['Patient', 'Given at', 'Dose (mg)', 'Route', 'Duration (min)'],
  ['P1', dt(1, 8), 1000, 'IV infusion', 60],
  ['P1', dt(1, 20), 1000, 'IV infusion', 60],
  ['P2', dt(2, 8), 750, 'IV infusion', 90],
];

/** Rows with content below the header, counted straight from the sheet. */
function contentRows(bytes: Uint8Array, sheet: string): number[] {
  const s = readWorkbook(bytes).sheets.find((x) => x.name === sheet)!;
  const out: number[] = [];
  for (let r = 1; r < s.rows.length; r++) if ((s.rows[r] ?? []).some((c) => c && c.text.trim() !== '')) out.push(r + 1);
  return out;
}

/** Every content row of the Levels sheet is imported (sourceRow) or listed as excluded. */
function expectAccounted(bytes: Uint8Array, a: ReturnType<typeof analyseWorkbook>) {
  const rows = contentRows(bytes, 'Levels');
  const imported = new Set((a.dataset?.subjects ?? []).flatMap((s) => s.observations.map((o) => o.sourceRow)));
  const excluded = new Set(a.report.excluded.filter((x) => x.sheet === 'Levels').map((x) => x.row));
  for (const r of rows) expect(imported.has(r) || excluded.has(r), `Levels row ${r} vanished`).toBe(true);
  for (const r of imported) expect(excluded.has(r!), `Levels row ${r} both imported and excluded`).toBe(false);
  expect(imported.size + excluded.size).toBe(rows.length);
}

describe('a "Sample time" column holding full date-times', () => {
  const levels: V[][] = [
    ['Patient', 'Sample time', 'Result', 'Unit'],
    ['P1', dt(1, 19, 30), 12.5, 'mg/L'],
    ['P1', dt(2, 7, 45), 9.1, 'mg/L'],
    ['P2', dt(2, 19), 15.2, 'mg/L'],
  ];
  const bytes = book({ Doses: DOSES, Levels: levels });

  it('is suggested as the date-time of the level (decided by the values) and every level is imported', () => {
    const a = analyseWorkbook(bytes);
    const col = a.mapping.sheets.find((s) => s.sheet === 'Levels')!.columns.find((c) => c.header === 'Sample time')!;
    expect(col.role).toBe('dateTime');
    expect(a.report.summary).toMatchObject({ patients: 2, doses: 3, levels: 3, excludedRows: 0 });
    expect(a.dataset!.subjects[0].observations.map((o) => o.timeH)).toEqual([11.5, 23.75]);
  });

  it('is read as a date-time even when an old template gave it the role time, with a warning', () => {
    const t = JSON.parse(JSON.stringify(analyseWorkbook(bytes).mapping)) as MappingTemplate;
    t.sheets.find((s) => s.sheet === 'Levels')!.columns.find((c) => c.header === 'Sample time')!.role = 'time';
    const a = analyseWorkbook(bytes, { mapping: t });
    expect(a.report.summary.levels).toBe(3);
    expect(a.report.problems.some((p) => p.severity === 'warning' && /holds full date-times/.test(p.message))).toBe(true);
    expect(a.mapping.sheets.find((s) => s.sheet === 'Levels')!.columns.find((c) => c.header === 'Sample time')!.role).toBe('dateTime');
  });

  it('wins over a date-only column next to it', () => {
    const withDate: V[][] = [['Patient', 'Date', 'Sample time', 'Result', 'Unit'], ...levels.slice(1).map((r) => [r[0], { serial: Math.floor((r[1] as { serial: number }).serial), z: 'dd/mm/yyyy' }, ...r.slice(1)])];
    const a = analyseWorkbook(book({ Doses: DOSES, Levels: withDate }));
    const cols = a.mapping.sheets.find((s) => s.sheet === 'Levels')!.columns;
    expect(cols.find((c) => c.header === 'Sample time')!.role).toBe('dateTime');
    expect(cols.find((c) => c.header === 'Date')!.role).toBe('ignore');
    expect(a.report.summary.levels).toBe(3);
    expect(a.report.notes.some((n) => /column B \(Date\) is not imported: the date is also in column C/.test(n))).toBe(true);
  });
});

describe('a level sheet of N rows accounts for N rows', () => {
  // Planted: empty result, unknown unit, before the first dose, duplicate, no time, excluded by comment,
  // no patient id, content only in an unmapped column (row 10 has nothing else).
  const levels: V[][] = [
    ['Patient', 'Sampled', 'Result', 'Unit', 'Comment', ''],
    ['P1', dt(1, 19, 30), 12.5, 'mg/L', '', ''],
    ['P1', dt(1, 21), null, 'mg/L', '', ''],
    ['P1', dt(1, 22), 3, 'furlong', '', ''],
    ['P1', dt(1, 6), 8, 'mg/L', '', ''],
    ['P1', dt(1, 19, 30), 12.5, 'mg/L', '', ''],
    ['P2', null, 7, 'mg/L', '', ''],
    ['P2', dt(2, 19), 15.2, 'mg/L', 'haemolysed', ''],
    [null, dt(2, 20), 15.2, 'mg/L', '', ''],
    [null, null, null, null, null, 'checked by J'],
    ['P3', dt(3, 10), 4.4, 'mg/L', '', ''],
  ];
  const bytes = book({ Doses: DOSES, Levels: levels });

  it('with the suggested mapping', () => {
    const a = analyseWorkbook(bytes);
    expectAccounted(bytes, a);
    expect(a.report.summary.levels).toBe(1);
    expect(a.report.excluded.find((x) => x.sheet === 'Levels' && x.row === 11)?.reason).toMatch(/no dose/);
  });

  it('when the sheet cannot be imported at all (no time column), every row is listed as excluded', () => {
    const t = JSON.parse(JSON.stringify(analyseWorkbook(bytes).mapping)) as MappingTemplate;
    const lv = t.sheets.find((s) => s.sheet === 'Levels')!;
    lv.columns = lv.columns.filter((c) => c.role !== 'dateTime');
    const a = analyseWorkbook(bytes, { mapping: t });
    expectAccounted(bytes, a);
    expect(a.report.summary.levels).toBe(0);
    expect(a.report.summary.excludedRows).toBe(contentRows(bytes, 'Levels').length);
    expect(a.report.excluded.find((x) => x.sheet === 'Levels' && x.row === 2)?.reason).toMatch(/sheet not imported: no time column/);
  });

  it('when the suggestion finds levels but no patient id column', () => {
    const noId = levels.map((r, i) => (i === 0 ? ['Bed', ...r.slice(1)] : r));
    const b2 = book({ Doses: DOSES, Levels: noId });
    const a = analyseWorkbook(b2);
    expectAccounted(b2, a);
    expect(a.report.summary.excludedRows).toBe(contentRows(b2, 'Levels').length);
    expect(a.report.problems.find((p) => p.sheet === 'Levels')).toMatchObject({ row: 1, severity: 'error', message: expect.stringMatching(/no column was recognised as the patient id/) });
  });

  it('when a template column is gone from the file', () => {
    const t = JSON.parse(JSON.stringify(analyseWorkbook(bytes).mapping)) as MappingTemplate;
    t.sheets.find((s) => s.sheet === 'Levels')!.columns.find((c) => c.role === 'levelValue')!.header = 'Concentration';
    const a = analyseWorkbook(bytes, { mapping: t });
    expectAccounted(bytes, a);
    expect(a.report.summary.levels).toBe(0);
  });
});

describe('covariates: canonical names, any other column, Cockcroft-Gault', () => {
  it('derives canonical names from headers, unit kept as written', () => {
    expect(['CrCl (mL/min)', 'Albumin g/L', 'ward', 'Ward', 'crcl_mL_min', 'age_y', 'Body surface (m2)', 'Gewicht (kg)'].map(canonicalCovariateName)).toEqual([
      'crcl_mL_min',
      'albumin_g_L',
      'ward',
      'ward',
      'crcl_mL_min',
      'age_y',
      'body_surface_m2',
      'gewicht_kg',
    ]);
  });

  const header = 'patient,date time,dose mg,route,level mg/L,Sex,Weight (kg),Age_y,Creatinine (mg/dL),Albumin g/L,Ward,Drug,Order no';
  const lines = [
    header,
    'A,2024-05-01 08:00,1000,oral,,M,72,60,1.0,35,7B,vancomycin,X1',
    'A,2024-05-01 20:00,,,10,M,72,60,1.0,35,7B,vancomycin,X2',
    'B,2024-05-01 08:00,1000,oral,,F,72,60,88.4,40,ICU,vancomycin,X3',
    'B,2024-05-01 20:00,,,12,F,72,60,88.4,40,ICU,vancomycin,X4',
  ];

  it('maps standard covariates to canonical names, other columns with values to covariates, and notes the ignored ones', () => {
    // Creatinine of patient B is in umol/L: give that row's unit through a unit column instead.
    const withUnit = lines.map((l, i) => (i === 0 ? l.replace('Creatinine (mg/dL)', 'Creatinine,Creatinine unit') : l.replace(/,(1\.0|88\.4),/, (_m, v) => `,${v},${v === '1.0' ? 'mg/dL' : 'umol/L'},`)));
    const a = analyseWorkbook(new TextEncoder().encode(withUnit.join('\n') + '\n'));
    const cols = a.mapping.sheets[0].columns;
    const role = (h: string) => cols.find((c) => c.header === h)!;
    expect(role('Age_y').role).toBe('age');
    expect(role('Albumin g/L')).toMatchObject({ role: 'covariate', name: 'albumin_g_L' });
    expect(role('Ward')).toMatchObject({ role: 'covariate', name: 'ward' });
    expect(role('Drug').role).toBe('ignore'); // the same text on every row
    expect(role('Order no').role).toBe('ignore'); // changes within one patient
    expect(a.report.notes.some((n) => /column M \(Drug\) is not imported: the same text/.test(n))).toBe(true);
    expect(a.report.notes.some((n) => /column N \(Order no\) is not imported: the text changes within one patient/.test(n))).toBe(true);
    const [A, B] = a.dataset!.subjects;
    expect(a.dataset!.covariateNames).toEqual(expect.arrayContaining(['sex', 'weight_kg', 'age_y', 'scr_umol_L', 'albumin_g_L', 'ward', 'crcl_mL_min']));
    expect(A.covariates.scr_umol_L).toBeCloseTo(88.4, 9);
    // Cockcroft & Gault, Nephron 1976;16:31-41 (from memory), worked by hand:
    // man, 60 y, 72 kg, SCr 1.0 mg/dL: (140 - 60) x 72 / (72 x 1.0) = 80 mL/min; woman x 0.85 = 68.
    expect(A.covariates.crcl_mL_min).toBeCloseTo(80, 9);
    // SCr 88.4 umol/L / 88.4 = 1.0 mg/dL (conversion as in the paper's units, from memory)
    expect(B.covariates.crcl_mL_min).toBeCloseTo(68, 9);
    expect(a.report.notes.some((n) => /crcl_mL_min was derived for 2 patient\(s\): creatinine clearance by Cockcroft-Gault 1976/.test(n))).toBe(true);
  });

  it('uses a given CrCl column and derives nothing', () => {
    const given = lines.map((l, i) => (i === 0 ? l.replace('Albumin g/L', 'CrCl (mL/min)') : l.replace(/,(35|40),/, ',55,')));
    const a = analyseWorkbook(new TextEncoder().encode(given.join('\n') + '\n'));
    expect(a.mapping.sheets[0].columns.find((c) => c.header === 'CrCl (mL/min)')).toMatchObject({ role: 'covariate', name: 'crcl_mL_min' });
    expect(a.dataset!.subjects.map((s) => s.covariates.crcl_mL_min)).toEqual([55, 55]);
    expect(a.report.notes.some((n) => /derived/.test(n))).toBe(false);
  });

  it('suggests all four covariates of the demo dataset', () => {
    const bytes = readFileSync(path.join(__dirname, '../../../resources/demo/ward-levels.csv'));
    const { template } = suggestMapping(readWorkbook(new Uint8Array(bytes)));
    const named = template.sheets[0].columns.filter((c) => ['weight', 'age', 'sex', 'covariate'].includes(c.role)).map((c) => c.header);
    expect(named).toEqual(['weight_kg', 'crcl_mL_min', 'age_y', 'sex']);
  });
});

describe('time limit wording', () => {
  it('prints the limit with its precision', () => {
    expect([50, 1, 1500, 60_000].map(formatSeconds)).toEqual(['0.05', '0.001', '1.5', '60']);
  });
});
