/** Writing an imported dataset and its validation report to .xlsx, .csv or .json (atomic writes). */
import * as path from 'node:path';
import { writeFileAtomic } from './files.js';
import type { Dataset } from '../../engine/data/types.js';
import type { ImportReport } from '../../engine/import/build.js';
import { datasetToCsv, datasetToWorkbook, reportToCsv, reportToWorkbook, workbookBytes } from '../../engine/import/export.js';


function extOf(file: string): string {
  return path.extname(file).toLowerCase();
}

export async function exportDataset(dataset: Dataset, file: string): Promise<void> {
  const ext = extOf(file);
  if (ext === '.xlsx') return writeFileAtomic(file, workbookBytes(datasetToWorkbook(dataset).workbook));
  if (ext === '.csv') return writeFileAtomic(file, datasetToCsv(dataset));
  throw new Error(`cannot export the dataset as "${ext || file}": use a file name ending in .xlsx or .csv`);
}

export async function exportReport(report: ImportReport, file: string): Promise<void> {
  const ext = extOf(file);
  if (ext === '.xlsx') return writeFileAtomic(file, workbookBytes(reportToWorkbook(report)));
  if (ext === '.csv') return writeFileAtomic(file, reportToCsv(report));
  if (ext === '.json') return writeFileAtomic(file, JSON.stringify(reportJson(report), null, 2) + '\n');
  throw new Error(`cannot export the report as "${ext || file}": use a file name ending in .json, .xlsx or .csv`);
}

/** report.json: mapping, summary, problems (rows as the spreadsheet shows them), excluded rows, notes. */
export function reportJson(report: ImportReport): object {
  return {
    mapping: report.mapping,
    summary: report.summary,
    problems: report.problems.map((p) => ({ sheet: p.sheet, row: p.row, column: p.column, value: p.value, severity: p.severity, message: p.message })),
    excluded: report.excluded,
    notes: report.notes,
  };
}
