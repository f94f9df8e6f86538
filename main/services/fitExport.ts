/**
 * A fit record as an .xlsx workbook (estimates, individual parameters, every level with its
 * predictions and residuals, likelihood, warnings); text cells never become formulas. The levels
 * sheet is where a large site's individual fits are read whole (the printed report holds at most
 * PRINT_SUBJECTS_MAX subjects' plots); past a sheet's row limit it continues in "Levels 2", ...
 */
import * as XLSX from 'xlsx';
import { sheetFromRows, workbookBytes } from '../../engine/import/export.js';

type Cell = string | number | boolean | null;
/** Rows of levels per sheet, under a spreadsheet's 1,048,576 rows with the header. */
export const LEVELS_PER_SHEET = 1_000_000;
const num = (x: unknown): Cell => (typeof x === 'number' && Number.isFinite(x) ? x : null);

export function fitToWorkbookBytes(record: Record<string, unknown>, title: string): Uint8Array {
  const wb = XLSX.utils.book_new();
  const population = Array.isArray(record.population) ? (record.population as Record<string, unknown>[]) : [];
  const est: Cell[][] = [['Parameter', 'Kind', 'Covariate', 'Estimate', 'Fixed', 'SE', 'RSE (%)']];
  for (const e of population) est.push([String(e.parameter ?? ''), String(e.kind ?? ''), e.covariate === undefined ? null : String(e.covariate), num(e.estimate), Boolean(e.fixed), num(e.se), num(e.rsePercent)]);
  XLSX.utils.book_append_sheet(wb, sheetFromRows(est), 'Estimates');
  const individual = Array.isArray(record.individual) ? (record.individual as { subject: string; parameters: Record<string, number> }[]) : [];
  const names = individual.length ? Object.keys(individual[0].parameters ?? {}) : [];
  const ind: Cell[][] = [['Subject', ...names]];
  for (const s of individual) ind.push([String(s.subject), ...names.map((n) => num(s.parameters?.[n]))]);
  XLSX.utils.book_append_sheet(wb, sheetFromRows(ind), 'Individual');
  const diagnostics = (record.diagnostics ?? null) as { observations?: unknown } | null;
  const observations = Array.isArray(diagnostics?.observations) ? (diagnostics.observations as Record<string, unknown>[]) : [];
  const header: Cell[] = ['Subject', 'Time (h)', 'Level (mg/L)', 'Below LLOQ', 'PRED (mg/L)', 'IPRED (mg/L)', 'IWRES', 'NPDE'];
  for (let from = 0, part = 1; from < observations.length || part === 1; from += LEVELS_PER_SHEET, part++) {
    const rows: Cell[][] = [header];
    for (const o of observations.slice(from, from + LEVELS_PER_SHEET)) rows.push([String(o.subject ?? ''), num(o.timeH), num(o.dv), Boolean(o.censored), num(o.pred), num(o.ipred), num(o.iwres), num(o.npde)]);
    XLSX.utils.book_append_sheet(wb, sheetFromRows(rows), part === 1 ? 'Levels' : `Levels ${part}`);
  }
  const l = (record.likelihood ?? {}) as Record<string, unknown>;
  const about: Cell[][] = [
    ['Fit', title],
    ['Engine version', String(record.engineVersion ?? '')],
    ['Seed', num(record.seed)],
    ['Data hash (SHA-256)', String(record.dataHash ?? '')],
    ['Subjects', num(record.nSubjects)],
    ['Observations', num(record.nObservations)],
    ['-2LL', num(l.minus2LL)],
    ['AIC', num(l.aic)],
    ['BIC', num(l.bic)],
  ];
  XLSX.utils.book_append_sheet(wb, sheetFromRows(about), 'Fit');
  const warnings = Array.isArray(record.warnings) ? (record.warnings as unknown[]).map((w) => [String(w)] as Cell[]) : [];
  XLSX.utils.book_append_sheet(wb, sheetFromRows([['Warning'], ...warnings]), 'Warnings');
  return workbookBytes(wb);
}
