/** Writing an imported dataset and its validation report to .xlsx, .csv or .json (atomic writes). */
import { promises as fs } from 'node:fs';
import * as path from 'node:path';
import { randomBytes } from 'node:crypto';
import type { Dataset } from '../../engine/data/types.js';
import type { ImportReport } from '../../engine/import/build.js';
import { datasetToCsv, datasetToWorkbook, reportToCsv, reportToWorkbook, workbookBytes } from '../../engine/import/export.js';

async function writeAtomic(file: string, data: string | Uint8Array): Promise<void> {
  const tmp = path.join(path.dirname(file), `.${path.basename(file)}.${process.pid}.${randomBytes(4).toString('hex')}.tmp`);
  const h = await fs.open(tmp, 'w');
  try {
    await h.writeFile(data);
    await h.sync();
  } finally {
    await h.close();
  }
  await fs.rename(tmp, file);
}

function extOf(file: string): string {
  return path.extname(file).toLowerCase();
}

export async function exportDataset(dataset: Dataset, file: string): Promise<void> {
  const ext = extOf(file);
  if (ext === '.xlsx') return writeAtomic(file, workbookBytes(datasetToWorkbook(dataset).workbook));
  if (ext === '.csv') return writeAtomic(file, datasetToCsv(dataset));
  throw new Error(`cannot export the dataset as "${ext || file}": use a file name ending in .xlsx or .csv`);
}

export async function exportReport(report: ImportReport, file: string): Promise<void> {
  const ext = extOf(file);
  if (ext === '.xlsx') return writeAtomic(file, workbookBytes(reportToWorkbook(report)));
  if (ext === '.csv') return writeAtomic(file, reportToCsv(report));
  if (ext === '.json') return writeAtomic(file, JSON.stringify(reportJson(report), null, 2) + '\n');
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
