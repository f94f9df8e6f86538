/**
 * Export of a dataset and of an import report to .xlsx and .csv. Text cells that a spreadsheet
 * program would run as a formula (starting with =, +, -, @, tab or carriage return; OWASP's
 * CSV-injection advice, from memory) get a leading single quote. Numbers stay numbers, so
 * negative numbers are not touched.
 */
import * as XLSX from 'xlsx';
import type { Dataset } from '../data/types.js';
import type { MappingTemplate, SheetMapping } from './roles.js';
import { defaultOptions } from './roles.js';
import type { ImportReport } from './build.js';

export function neutraliseText(s: string): string {
  return /^[=+\-@\t\r]/.test(s) ? `'${s}` : s;
}

type Out = string | number | boolean | null;

function neutraliseRow(row: readonly Out[]): Out[] {
  return row.map((v) => (typeof v === 'string' ? neutraliseText(v) : v));
}

/** A sheet from rows; every string goes in as a text cell (never a formula). */
export function sheetFromRows(rows: readonly (readonly Out[])[]): XLSX.WorkSheet {
  return XLSX.utils.aoa_to_sheet(rows.map(neutraliseRow), { cellDates: false });
}

export function csvField(v: Out): string {
  if (v === null) return '';
  if (typeof v === 'number') return Number.isFinite(v) ? String(v) : '';
  if (typeof v === 'boolean') return v ? 'true' : 'false';
  const s = neutraliseText(v);
  return /[",\r\n;]/.test(s) ? `"${s.replace(/"/g, '""')}"` : s;
}

export function rowsToCsv(rows: readonly (readonly Out[])[]): string {
  return rows.map((r) => r.map(csvField).join(',')).join('\r\n') + '\r\n';
}

export function workbookBytes(wb: XLSX.WorkBook): Uint8Array {
  const out = XLSX.write(wb, { type: 'array', bookType: 'xlsx', compression: true }) as ArrayBuffer;
  return new Uint8Array(out);
}

const DOSE_HEADERS = ['Patient', 'Time (h)', 'Dose', 'Dose unit', 'Route', 'Duration (h)', 'Steady-state interval (h)'];
const LEVEL_HEADERS = ['Patient', 'Time (h)', 'Level', 'Level unit', 'LLOQ (mg/L)'];

/**
 * The dataset as a three-sheet workbook (Doses, Levels, Patients) and the mapping template that
 * imports it back to the same dataset.
 */
export function datasetToWorkbook(dataset: Dataset): { workbook: XLSX.WorkBook; template: MappingTemplate } {
  const doses: Out[][] = [DOSE_HEADERS];
  const levels: Out[][] = [LEVEL_HEADERS];
  const patients: Out[][] = [['Patient', ...dataset.covariateNames]];
  for (const s of dataset.subjects) {
    for (const d of s.doses) doses.push([s.id, d.timeH, d.amountMg, 'mg', d.route, d.route === 'infusion' ? d.durationH : null, d.steadyStateIntervalH ?? null]);
    for (const o of s.observations)
      levels.push([s.id, o.timeH, o.censored ? `<${o.lloqMgL ?? o.valueMgL}` : o.valueMgL, 'mg/L', o.lloqMgL ?? null]);
    const cov = s.covariates;
    patients.push([s.id, ...dataset.covariateNames.map((n) => (n in cov ? cov[n] : null))]);
  }
  const wb = XLSX.utils.book_new();
  XLSX.utils.book_append_sheet(wb, sheetFromRows(doses), 'Doses');
  XLSX.utils.book_append_sheet(wb, sheetFromRows(levels), 'Levels');
  if (dataset.covariateNames.length > 0) XLSX.utils.book_append_sheet(wb, sheetFromRows(patients), 'Patients');
  const col = (i: number) => String.fromCharCode(65 + i);
  const sheets: SheetMapping[] = [
    {
      sheet: 'Doses',
      content: 'doses',
      headerRow: 1,
      columns: [
        { role: 'patientId', header: 'Patient', column: 'A' },
        { role: 'elapsedH', header: 'Time (h)', column: 'B', unit: 'h' },
        { role: 'doseAmount', header: 'Dose', column: 'C' },
        { role: 'doseUnit', header: 'Dose unit', column: 'D' },
        { role: 'route', header: 'Route', column: 'E' },
        { role: 'infusionDuration', header: 'Duration (h)', column: 'F', unit: 'h' },
        { role: 'steadyStateInterval', header: 'Steady-state interval (h)', column: 'G' },
      ],
    },
    {
      sheet: 'Levels',
      content: 'levels',
      headerRow: 1,
      columns: [
        { role: 'patientId', header: 'Patient', column: 'A' },
        { role: 'elapsedH', header: 'Time (h)', column: 'B', unit: 'h' },
        { role: 'levelValue', header: 'Level', column: 'C' },
        { role: 'levelUnit', header: 'Level unit', column: 'D' },
        { role: 'lloq', header: 'LLOQ (mg/L)', column: 'E', unit: 'mg/L' },
      ],
    },
  ];
  if (dataset.covariateNames.length > 0)
    sheets.push({
      sheet: 'Patients',
      content: 'patients',
      headerRow: 1,
      columns: [
        { role: 'patientId', header: 'Patient', column: 'A' },
        ...dataset.covariateNames.map((n, i) => ({ role: 'covariate' as const, header: neutraliseText(n), column: col(i + 1), name: n })),
      ],
    });
  return { workbook: wb, template: { format: 'plateau-import-mapping', version: 1, sheets, options: { ...defaultOptions(), clockChanges: 'none', excludeCommentWords: [] } } };
}

function reportTables(report: ImportReport) {
  const s = report.summary;
  const summary: Out[][] = [
    ['Item', 'Count'],
    ['Patients', s.patients],
    ['Doses', s.doses],
    ['Levels', s.levels],
    ['Censored levels', s.censored],
    ['Excluded rows', s.excludedRows],
    ['Errors', report.problems.filter((p) => p.severity === 'error').length],
    ['Warnings', report.problems.filter((p) => p.severity === 'warning').length],
  ];
  const problems: Out[][] = [['Sheet', 'Row', 'Column', 'Value', 'Severity', 'Message']];
  for (const p of report.problems) problems.push([p.sheet, p.row || null, p.column, p.value, p.severity, p.message]);
  const excluded: Out[][] = [['Sheet', 'Row', 'Reason']];
  for (const x of report.excluded) excluded.push([x.sheet, x.row, x.reason]);
  const notes: Out[][] = [['Note'], ...report.notes.map((n) => [n])];
  return { summary, problems, excluded, notes };
}

export function reportToWorkbook(report: ImportReport): XLSX.WorkBook {
  const t = reportTables(report);
  const wb = XLSX.utils.book_new();
  XLSX.utils.book_append_sheet(wb, sheetFromRows(t.summary), 'Summary');
  XLSX.utils.book_append_sheet(wb, sheetFromRows(t.problems), 'Problems');
  XLSX.utils.book_append_sheet(wb, sheetFromRows(t.excluded), 'Excluded rows');
  XLSX.utils.book_append_sheet(wb, sheetFromRows(t.notes), 'Notes');
  return wb;
}

/** The report as one CSV table: the problems, then the excluded rows (severity "excluded"). */
export function reportToCsv(report: ImportReport): string {
  const rows: Out[][] = [['sheet', 'row', 'column', 'value', 'severity', 'message']];
  for (const p of report.problems) rows.push([p.sheet, p.row || null, p.column, p.value, p.severity, p.message]);
  for (const x of report.excluded) rows.push([x.sheet, x.row, '', '', 'excluded', x.reason]);
  return rowsToCsv(rows);
}

/**
 * The dataset as a CSV for spreadsheet programs: the canonical CSV's columns (subject, time_h,
 * event, amount_mg, duration_h, conc_mg_L, censored, lloq_mg_L, route, ss_interval_h,
 * covariates), with text cells neutralised. For reading back into Plateau use writeCanonicalCsv.
 */
export function datasetToCsv(dataset: Dataset): string {
  const hasSs = dataset.subjects.some((s) => s.doses.some((d) => d.steadyStateIntervalH !== undefined));
  const header: Out[] = ['subject', 'time_h', 'event', 'amount_mg', 'duration_h', 'conc_mg_L', 'censored', 'lloq_mg_L', 'route', ...(hasSs ? ['ss_interval_h'] : []), ...dataset.covariateNames];
  const rows: Out[][] = [header];
  for (const s of dataset.subjects) {
    const cov = dataset.covariateNames.map((n) => (n in s.covariates ? s.covariates[n] : null));
    const events: { t: number; o: number; cells: Out[] }[] = [];
    s.doses.forEach((d, k) =>
      events.push({ t: d.timeH, o: k, cells: [s.id, d.timeH, 'dose', d.amountMg, d.route === 'infusion' ? d.durationH : null, null, null, null, d.route === 'oral' ? 'oral' : 'iv', ...(hasSs ? [d.steadyStateIntervalH ?? null] : []), ...cov] }),
    );
    s.observations.forEach((o, k) =>
      events.push({ t: o.timeH, o: 1e9 + k, cells: [s.id, o.timeH, 'level', null, null, o.valueMgL, o.censored ? 1 : 0, o.lloqMgL ?? null, null, ...(hasSs ? [null] : []), ...cov] }),
    );
    events.sort((a, b) => a.t - b.t || a.o - b.o);
    for (const e of events) rows.push(e.cells);
  }
  return rowsToCsv(rows);
}
