/**
 * Generator of the spreadsheet-import fixture workbooks. INVENTED DATA: "Northfield General
 * Hospital, Ward 7B" and every patient, dose and level here are made up for tests; no real
 * hospital or patient is described.
 *
 * Run: npx jiti tests/fixtures/import/make_fixtures.ts
 * Writes the workbooks next to this file and expected.json, which lists every planted problem
 * with the sheet and row (as the spreadsheet shows it) where the import must report it.
 */
import * as XLSX from 'xlsx';
import { writeFileSync } from 'node:fs';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';

export interface PlantedProblem {
  sheet: string;
  row: number;
  severity: 'error' | 'warning' | 'excluded';
  /** A word or phrase the message (or the exclusion reason) must contain. */
  includes: string;
  what: string;
}

export interface FixtureSpec {
  file: string;
  description: string;
  /** Options the test passes (CLI flags in words). */
  options: Record<string, unknown>;
  planted: PlantedProblem[];
  /** Counts the import must report. */
  summary: { patients: number; doses: number; levels: number; censored: number; excludedRows: number };
  /** Spot checks: patient, kind, index in time order, timeH (or valueMgL) expected. */
  checks: { patient: string; kind: 'dose' | 'level'; index: number; timeH?: number; valueMgL?: number; durationH?: number; censored?: boolean }[];
  /** Covariate checks. */
  covariates: { patient: string; name: string; value: number | string }[];
}

type V = string | number | null | { serial: number; z: string };

const serial = (y: number, m: number, d: number, H = 0, M = 0) => Date.UTC(y, m - 1, d, H, M) / 86_400_000 + 25569;
const dateCell = (y: number, m: number, d: number): V => ({ serial: serial(y, m, d), z: 'dd/mm/yyyy' });
const timeCell = (H: number, M: number): V => ({ serial: (H * 60 + M) / 1440, z: 'hh:mm' });
const p2 = (n: number) => String(n).padStart(2, '0');
const dmy = (y: number, m: number, d: number, H: number, M: number) => `${p2(d)}/${p2(m)}/${y} ${p2(H)}:${p2(M)}`;

function sheet(rows: V[][]): XLSX.WorkSheet {
  const plain = rows.map((r) => r.map((v) => (v !== null && typeof v === 'object' ? v.serial : v)));
  const ws = XLSX.utils.aoa_to_sheet(plain);
  rows.forEach((r, ri) =>
    r.forEach((v, ci) => {
      if (v !== null && typeof v === 'object') {
        const addr = XLSX.utils.encode_cell({ r: ri, c: ci });
        ws[addr] = { t: 'n', v: v.serial, z: v.z };
      }
    }),
  );
  return ws;
}

/** Fixture A: two sheets (MAR doses, lab levels) plus a patient sheet, titles above headers. */
function twoSheetFixture(): { wb: XLSX.WorkBook; spec: FixtureSpec } {
  const planted: PlantedProblem[] = [];
  const mar: V[][] = [
    ['Northfield General Hospital (INVENTED DATA) - Ward 7B medication administration record'],
    ['Exported 02/04/2024 by pharmacy, vancomycin'],
    [],
    ['Patient ID', 'Administered', 'Drug', 'Dose', 'Unit', 'Route', 'Infusion end', 'Comment'],
  ];
  const M = (row: V[], problem?: Omit<PlantedProblem, 'sheet' | 'row'>) => {
    mar.push(row);
    if (problem) planted.push({ sheet: 'MAR export', row: mar.length, ...problem });
  };
  const inf = (id: string, y: number, m: number, d: number, H: number, Mi: number, mg: number, durMin: number, unit = 'mg', comment = '') => {
    const end = Date.UTC(y, m - 1, d, H, Mi) + durMin * 60_000;
    const e = new Date(end);
    return [id, dmy(y, m, d, H, Mi), 'Vancomycin', mg, unit, 'IV infusion', dmy(e.getUTCFullYear(), e.getUTCMonth() + 1, e.getUTCDate(), e.getUTCHours(), e.getUTCMinutes()), comment] as V[];
  };
  // W7B-001: three ordinary infusions.
  M(inf('W7B-001', 2024, 3, 28, 8, 0, 1000, 60));
  M(inf('W7B-001', 2024, 3, 28, 20, 0, 1000, 60));
  M(inf('W7B-001', 2024, 3, 29, 8, 0, 1250, 90));
  // W7B-002: infusion across midnight.
  M(inf('W7B-002', 2024, 3, 29, 23, 30, 1500, 60));
  // W7B-003: across the EU clock change of 31/03/2024.
  M(inf('W7B-003', 2024, 3, 30, 20, 0, 1000, 60));
  M(inf('W7B-003', 2024, 3, 31, 8, 0, 1000, 60));
  // W7B-004: planted dose errors.
  M(inf('W7B-004', 2024, 3, 28, 9, 0, 1000, 60));
  M(inf('W7B-004', 2024, 3, 28, 21, 0, -1000, 60), { severity: 'error', includes: 'negative', what: 'negative dose' });
  M(inf('W7B-004', 2024, 3, 29, 9, 0, 0, 60).map((v, i) => (i === 3 ? 'one gram' : v)), { severity: 'error', includes: 'not a number', what: 'non-numeric dose' });
  M(['W7B-004', dmy(2024, 3, 29, 21, 0), 'Vancomycin', 1000, 'mg', 'IV infusion', dmy(2024, 3, 29, 20, 0), ''], { severity: 'error', includes: 'before or when it starts', what: 'infusion end before start' });
  M(inf('W7B-004', 2024, 3, 30, 9, 0, 1000, 60, 'tabs'), { severity: 'error', includes: 'unknown dose unit', what: 'unknown dose unit' });
  M(inf('W7B-004', 2024, 3, 30, 21, 0, 1000, 60, ''), { severity: 'error', includes: 'unit is missing', what: 'missing dose unit' });
  M(inf('W7B-004', 2024, 3, 31, 9, 0, 1000, 60));
  M(inf('W7B-004', 2024, 3, 31, 9, 0, 1000, 60), { severity: 'error', includes: 'duplicate', what: 'duplicate dose row' });
  M(['W7B-004', '31/02/2024 09:00', 'Vancomycin', 1000, 'mg', 'IV infusion', '31/02/2024 10:00', ''], { severity: 'error', includes: 'not a valid', what: 'impossible date' });
  // W7B-005: a dose a month late (a wrong month typed).
  M(inf('W7B-005', 2024, 3, 28, 10, 0, 750, 60));
  M(inf('W7B-005', 2024, 3, 28, 22, 0, 750, 60));
  M(inf('W7B-005', 2024, 4, 29, 10, 0, 750, 60), { severity: 'warning', includes: 'wrong date', what: 'time gap suggesting a wrong date' });
  // W7B-006..8: one dose each; a dose comment that excludes it.
  M(inf('W7B-006', 2024, 3, 28, 6, 0, 1000, 120));
  M(inf('W7B-007', 2024, 3, 28, 7, 0, 1000, 60));
  M(inf('W7B-008', 2024, 3, 28, 8, 0, 1000, 60));
  M(inf('W7B-008', 2024, 3, 28, 20, 0, 1000, 60, 'mg', 'Not given - patient in theatre'), { severity: 'excluded', includes: 'not given', what: 'dose comment: not given' });

  const lab: V[][] = [
    ['Northfield General Hospital (INVENTED DATA) - laboratory results, vancomycin'],
    [],
    ['MRN', 'Collection date', 'Collection time', 'Test', 'Result', 'Units', 'LLOQ', 'Sample comment'],
  ];
  const L = (row: V[], problem?: Omit<PlantedProblem, 'sheet' | 'row'>) => {
    lab.push(row);
    if (problem) planted.push({ sheet: 'Lab results', row: lab.length, ...problem });
  };
  const lv = (id: string, y: number, m: number, d: number, H: number, Mi: number, result: V, unit = 'mg/L', comment = '', lloq: V = 1) =>
    [id, dateCell(y, m, d), timeCell(H, Mi), 'VANCO', result, unit, lloq, comment] as V[];
  L(lv('W7B-001', 2024, 3, 28, 19, 30, 8.2));
  L(lv('W7B-001', 2024, 3, 29, 7, 45, 11.4));
  L(lv('W7B-002', 2024, 3, 30, 11, 0, 9.6));
  L(lv('W7B-003', 2024, 3, 31, 2, 30, 14.1), { severity: 'warning', includes: 'skipped', what: 'time in the hour skipped by the clock change' });
  L(lv('W7B-003', 2024, 3, 31, 7, 30, 10.3));
  L(lv('W7B-004', 2024, 3, 28, 20, 30, 7.7));
  L(lv('W7B-005', 2024, 3, 20, 8, 0, 12.5), { severity: 'error', includes: 'before the first dose', what: 'level before any dose' });
  L(lv('W7B-005', 2024, 3, 28, 21, 30, '<2.0'));
  L(lv('W7B-006', 2024, 3, 28, 18, 0, 'BLQ', 'mg/L', '', 1.5));
  L(lv('W7B-006', 2024, 3, 29, 6, 0, 6.6, 'mg/L', 'Haemolysed sample'), { severity: 'excluded', includes: 'haemolysed', what: 'haemolysed comment' });
  L(lv('W7B-006', 2024, 3, 29, 7, 0, null, 'mg/L', 'Sample not received'), { severity: 'excluded', includes: 'not received', what: 'not received comment' });
  L(lv('W7B-006', 2024, 3, 29, 8, 0, 5.5, 'mmol/mL'), { severity: 'error', includes: 'unknown level unit', what: 'unknown level unit' });
  L(lv('W7B-006', 2024, 3, 29, 9, 0, 5.1, ''), { severity: 'error', includes: 'unit is missing', what: 'missing level unit' });
  L(lv('W7B-007', 2024, 3, 28, 19, 0, -3.2), { severity: 'error', includes: 'negative', what: 'negative level' });
  L(lv('W7B-007', 2024, 3, 28, 20, 0, 'see comment'), { severity: 'error', includes: 'not a number', what: 'non-numeric level' });
  L(lv('W7B-007', 2024, 3, 29, 6, 30, 9.9));
  L(lv('W7B-008', 2024, 3, 29, 7, 0, 13.0));

  const pts: V[][] = [['Patient ID', 'Sex', 'Date of birth', 'Weight (kg)', 'Height (cm)', 'Creatinine', 'Creatinine unit']];
  const P = (row: V[], problem?: Omit<PlantedProblem, 'sheet' | 'row'>) => {
    pts.push(row);
    if (problem) planted.push({ sheet: 'Patients', row: pts.length, ...problem });
  };
  P(['W7B-001', 'F', '14/02/1956', 68, 162, 88, 'umol/L']);
  P(['W7B-002', 'M', '03/11/1971', 92.5, 181, 110, 'umol/L']);
  P(['W7B-003', 'M', '22/07/1948', 74, 175, 135, 'umol/L']);
  P(['W7B-004', 'F', '09/09/1990', 55, 158, 61, 'umol/L']);
  P(['W7B-005', 'M', '30/01/1962', 81, 178, 1.1, 'mg/dL']);
  P(['W7B-006', 'F', '17/05/1983', 700, 166, 72, 'umol/L'], { severity: 'warning', includes: 'plausible', what: 'weight outside plausible range' });
  P(['W7B-007', 'F', '05/12/1975', 63, 160, 79, 'umol/L']);
  P(['W7B-007', 'M', '05/12/1975', 63, 160, 79, 'umol/L'], { severity: 'error', includes: 'two', what: 'one patient with two sexes' });
  P(['W7B-008', 'M', '12/06/1959', 88, 183, 95, 'umol/L']);
  P(['W7B-008', 'M', '21/06/1959', 88, 183, 95, 'umol/L'], { severity: 'error', includes: 'birth date', what: 'one patient with two birth dates' });

  // The EU clock change lies between W7B-003's dose at 20:00 on 30/03 and the level at 02:30.
  planted.push({ sheet: 'Lab results', row: 7, severity: 'warning', includes: 'clocks went forward', what: 'interval across the daylight-saving change' });

  const wb = XLSX.utils.book_new();
  XLSX.utils.book_append_sheet(wb, sheet(mar), 'MAR export');
  XLSX.utils.book_append_sheet(wb, sheet(lab), 'Lab results');
  XLSX.utils.book_append_sheet(wb, sheet(pts), 'Patients');
  const spec: FixtureSpec = {
    file: 'ward7b_two_sheets.xlsx',
    description: 'INVENTED: two-sheet layout (MAR + lab) with a patient sheet; text day-first date-times in the MAR, date and time cells in the lab sheet',
    options: { dateOrder: 'dayFirst' },
    planted,
    summary: { patients: 8, doses: 14, levels: 10, censored: 2, excludedRows: 0 },
    checks: [
      { patient: 'W7B-001', kind: 'dose', index: 0, timeH: 0, durationH: 1 },
      { patient: 'W7B-001', kind: 'dose', index: 2, timeH: 24, durationH: 1.5 },
      { patient: 'W7B-001', kind: 'level', index: 0, timeH: 11.5, valueMgL: 8.2 },
      { patient: 'W7B-002', kind: 'dose', index: 0, timeH: 0, durationH: 1 },
      { patient: 'W7B-002', kind: 'level', index: 0, timeH: 11.5 },
      // Written times across the clock change: 20:00 -> 07:30 next day is 11.5 h as written.
      { patient: 'W7B-003', kind: 'level', index: 1, timeH: 11.5 },
      { patient: 'W7B-005', kind: 'level', index: 0, timeH: 11.5, valueMgL: 2, censored: true },
      { patient: 'W7B-006', kind: 'level', index: 0, timeH: 12, valueMgL: 1.5, censored: true },
    ],
    covariates: [
      { patient: 'W7B-001', name: 'sex', value: 'F' },
      { patient: 'W7B-001', name: 'weight_kg', value: 68 },
      // 1.1 mg/dL * 88.4 = 97.24 umol/L (factor: creatinine 113.12 g/mol, PubChem, from memory)
      { patient: 'W7B-005', name: 'scr_umol_L', value: 97.24 },
      // Age at the first event 28/03/2024 08:00 from birth 14/02/1956: 68.12 y (365.25-day years)
      { patient: 'W7B-001', name: 'age_y', value: 68.12 },
      // Derived (no CrCl column), Cockcroft & Gault 1976 (from memory), worked by hand:
      // (140 - 68.12) x 68 / (72 x 88/88.4 mg/dL) x 0.85 (woman) = 57.966 -> 57.97 mL/min
      { patient: 'W7B-001', name: 'crcl_mL_min', value: 57.97 },
    ],
  };
  // excludedRows: all planted errors on rows + comment exclusions (warnings do not exclude).
  spec.summary.excludedRows = planted.filter((p) => p.severity === 'error' || p.severity === 'excluded').length;
  return { wb, spec };
}

/** Fixture B: one sheet with an event-kind column, date cells + text times, levels in umol/L. */
function oneSheetFixture(): { wb: XLSX.WorkBook; spec: FixtureSpec } {
  const planted: PlantedProblem[] = [];
  const rows: V[][] = [['Patient', 'Event', 'Date', 'Time', 'Amount', 'Amount unit', 'Route', 'Duration (min)', 'Result', 'Result unit', 'Remarks']];
  const R = (row: V[], problem?: Omit<PlantedProblem, 'sheet' | 'row'>) => {
    rows.push(row);
    if (problem) planted.push({ sheet: 'Events', row: rows.length, ...problem });
  };
  R(['N-101', 'Dose', dateCell(2024, 10, 26), '22:00', 1, 'g', 'IV infusion', 60, null, null, '']);
  R(['N-101', 'Level', dateCell(2024, 10, 27), '01:00', null, null, null, null, 17.25, 'umol/L', 'peak']);
  R(['N-101', 'Dose', dateCell(2024, 10, 27), '10:00', 1, 'g', 'IV infusion', 60, null, null, '']);
  R(['N-101', 'Level', dateCell(2024, 10, 27), '09:30', null, null, null, null, 6.9, 'umol/L', 'trough'], { severity: 'warning', includes: 'clocks went back', what: 'interval across the autumn clock change' });
  R(['N-102', 'Dose', dateCell(2024, 10, 20), '08:00', 750, 'mg', 'IV infusion', 90, null, null, '']);
  R(['N-102', 'Level', dateCell(2024, 10, 20), '19:30', null, null, null, null, '<1.4', 'umol/L', '']);
  R(['N-102', 'Note', dateCell(2024, 10, 20), '20:00', null, null, null, null, null, null, 'ward round'], { severity: 'error', includes: 'neither a dose nor a level', what: 'unknown event kind' });
  R(['N-102', 'Level', dateCell(2024, 10, 21), null, null, null, null, null, 8.1, 'umol/L', ''], { severity: 'error', includes: 'no time of day', what: 'date without time' });
  R(['N-102', 'Dose', dateCell(2024, 10, 21), '08:00', 750, 'mg', 'intrathecal', 90, null, null, ''], { severity: 'error', includes: 'route', what: 'unknown route' });
  const wb = XLSX.utils.book_new();
  XLSX.utils.book_append_sheet(wb, sheet(rows), 'Events');
  const spec: FixtureSpec = {
    file: 'ward7b_one_sheet.xlsx',
    description: 'INVENTED: one sheet with an event column, levels in umol/L (vancomycin 1449.3 g/mol), clock times across midnight and the autumn clock change',
    options: { molarMassGPerMol: 1449.3 },
    planted,
    summary: { patients: 2, doses: 3, levels: 3, censored: 1, excludedRows: 3 },
    checks: [
      { patient: 'N-101', kind: 'level', index: 0, timeH: 3, valueMgL: 17.25 * 1.4493 },
      { patient: 'N-101', kind: 'dose', index: 1, timeH: 12, durationH: 1 },
      { patient: 'N-102', kind: 'level', index: 0, timeH: 11.5, valueMgL: 1.4 * 1.4493, censored: true },
      { patient: 'N-101', kind: 'dose', index: 0, timeH: 0, durationH: 1 },
    ],
    covariates: [],
  };
  return { wb, spec };
}

/** Fixture C: semicolon CSV, German headers, decimal commas, day-first dates, "< 2,0" levels. */
function csvFixture(): { text: string; spec: FixtureSpec } {
  const planted: PlantedProblem[] = [];
  const lines = [
    'Station 7B (ERFUNDENE DATEN / INVENTED DATA) - Vancomycin',
    '',
    'Patientennummer;Datum;Uhrzeit;Art;Menge;Einheit;Applikation;Dauer (min);Spiegel;Einheit;Bemerkung;Gewicht (kg);Kreatinin;Einheit',
  ];
  const add = (line: string, problem?: Omit<PlantedProblem, 'sheet' | 'row'>) => {
    lines.push(line);
    if (problem) planted.push({ sheet: 'Sheet1', row: lines.length, ...problem });
  };
  add('K-01;28.03.2024;08:00;Gabe;1000;mg;i.v. Infusion;60;;;;72,5;1,2;mg/dL');
  add('K-01;28.03.2024;19:45;Spiegel;;;;;12,4;mg/L;;;;');
  add('K-01;29.03.2024;07:50;Spiegel;;;;;< 2,0;mg/L;;;;');
  add('K-01;29.03.2024;08:00;Gabe;1250;mg;i.v. Infusion;90;;;;;;');
  add('K-01;29.03.2024;12:00;Spiegel;;;;;18,3;mg/L;hämolysiert;;;', { severity: 'excluded', includes: 'hamolysiert', what: 'haemolysed (German)' });
  add('K-02;01.04.2024;09:00;Gabe;1,5;g;i.v. Infusion;120;;;;101;95;umol/L');
  add('K-02;01.04.2024;21:00;Spiegel;;;;;9,75;mg/L;nicht hämolysiert;;;');
  return {
    text: lines.join('\r\n') + '\r\n',
    spec: {
      file: 'ward7b_german.csv',
      description: 'INVENTED: semicolon CSV with German headers, decimal commas, day-first dates, creatinine in mg/dL and umol/L',
      options: {},
      planted,
      summary: { patients: 2, doses: 3, levels: 3, censored: 1, excludedRows: 1 },
      checks: [
        { patient: 'K-01', kind: 'level', index: 0, timeH: 11.75, valueMgL: 12.4 },
        { patient: 'K-01', kind: 'level', index: 1, timeH: 23 + 50 / 60, valueMgL: 2, censored: true },
        { patient: 'K-02', kind: 'dose', index: 0, timeH: 0, durationH: 2 },
        { patient: 'K-02', kind: 'level', index: 0, timeH: 12, valueMgL: 9.75 },
      ],
      covariates: [
        { patient: 'K-01', name: 'weight_kg', value: 72.5 },
        // 1.2 mg/dL * 88.4 umol/L per mg/dL = 106.08 umol/L
        { patient: 'K-01', name: 'scr_umol_L', value: 106.08 },
        { patient: 'K-02', name: 'scr_umol_L', value: 95 },
      ],
    },
  };
}

/** Fixture D: every text date fits both orders: an explicit choice is required. */
function ambiguousFixture(): { text: string; spec: FixtureSpec } {
  const lines = ['patient,date time,dose mg,route,duration (h),level mg/L', 'A-1,03/04/2024 08:00,1000,iv infusion,1,', 'A-1,03/04/2024 20:00,,,,9.1', 'A-1,05/04/2024 08:00,1000,iv infusion,1,'];
  return {
    text: lines.join('\n') + '\n',
    spec: {
      file: 'ambiguous_dates.csv',
      description: 'INVENTED: text dates that fit day-first and month-first',
      options: {},
      planted: [2, 3, 4].map((row) => ({ sheet: 'Sheet1', row, severity: 'error' as const, includes: 'day-first or month-first', what: 'ambiguous date' })),
      summary: { patients: 0, doses: 0, levels: 0, censored: 0, excludedRows: 3 },
      checks: [],
      covariates: [],
    },
  };
}

export function buildFixtures(): { name: string; bytes: Uint8Array; spec: FixtureSpec }[] {
  const out: { name: string; bytes: Uint8Array; spec: FixtureSpec }[] = [];
  for (const f of [twoSheetFixture(), oneSheetFixture()]) {
    const bytes = new Uint8Array(XLSX.write(f.wb, { type: 'array', bookType: 'xlsx', compression: true }) as ArrayBuffer);
    out.push({ name: f.spec.file, bytes, spec: f.spec });
  }
  for (const f of [csvFixture(), ambiguousFixture()]) out.push({ name: f.spec.file, bytes: new TextEncoder().encode(f.text), spec: f.spec });
  return out;
}

const isMain = process.argv[1] !== undefined && path.resolve(process.argv[1]) === fileURLToPath(import.meta.url);
if (isMain) {
  const dir = path.dirname(fileURLToPath(import.meta.url));
  const fixtures = buildFixtures();
  for (const f of fixtures) writeFileSync(path.join(dir, f.name), f.bytes);
  writeFileSync(
    path.join(dir, 'expected.json'),
    JSON.stringify({ generatedBy: 'tests/fixtures/import/make_fixtures.ts', note: 'INVENTED DATA for tests', fixtures: fixtures.map((f) => f.spec) }, null, 2) + '\n',
  );
  console.log(`wrote ${fixtures.length} fixtures to ${dir}`);
}
