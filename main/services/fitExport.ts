/** A fit record as an .xlsx workbook (estimates, individual parameters, likelihood, warnings); text cells never become formulas. */
import * as XLSX from 'xlsx';
import { sheetFromRows, workbookBytes } from '../../engine/import/export.js';

type Cell = string | number | boolean | null;
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
