/**
 * The spreadsheet branch of the dataset loader: `plateau fit / simulate / dose --data file.xlsx
 * [--mapping template.json]`. Rows with errors are not dropped silently here: if the import
 * reports any error, loading fails with every error listed (run `plateau check` to see them all
 * with warnings); rows excluded by a sample comment ("haemolysed") are intended and pass.
 */
import { promises as fs } from 'node:fs';
import { DataError, type Dataset } from '../../engine/data/types.js';
import { importSpreadsheetFile, ImportError, type ImportFileOptions, type ImportOutcome } from './importService.js';
import { formatRows, groupProblems } from '../../engine/import/group.js';

export async function readMappingFile(mappingPath: string): Promise<unknown> {
  let text: string;
  try {
    text = await fs.readFile(mappingPath, 'utf8');
  } catch (e) {
    const code = (e as NodeJS.ErrnoException).code;
    throw new ImportError('file', code === 'ENOENT' ? `mapping file not found: ${mappingPath}` : `cannot read ${mappingPath}: ${(e as Error).message}`);
  }
  try {
    return JSON.parse(text.charCodeAt(0) === 0xfeff ? text.slice(1) : text);
  } catch (e) {
    throw new ImportError('template', `${mappingPath} is not valid JSON (${(e as Error).message}): save the mapping again with plateau check --save-mapping`);
  }
}

export async function importWithMappingFile(path: string, mappingPath: string | undefined, opts: ImportFileOptions = {}): Promise<ImportOutcome> {
  const mapping = mappingPath !== undefined ? await readMappingFile(mappingPath) : undefined;
  return importSpreadsheetFile(path, { ...opts, ...(mapping !== undefined ? { mapping } : {}) });
}

export async function loadSpreadsheetDataset(path: string, mappingPath: string | undefined): Promise<Dataset> {
  const outcome = await importWithMappingFile(path, mappingPath);
  const errors = outcome.report.problems.filter((p) => p.severity === 'error');
  if (errors.length > 0 || !outcome.dataset) {
    throw new DataError(
      errors.length > 0
        ? // One line per repeated problem, with the count and the rows (a missing role touches every row).
          groupProblems(errors).map((g) => {
            const rows = g.rows.filter((r) => r > 0);
            return {
              row: rows.length === 1 ? rows[0] : undefined,
              field: g.column || undefined,
              message: `${g.sheet ? `sheet "${g.sheet}": ` : ''}${rows.length > 1 ? `${rows.length} rows (${formatRows(rows)}): ` : ''}${g.message}${mappingPath ? '' : ' (suggested mapping; run plateau check --data <file> --save-mapping <template.json> to confirm it)'}`,
            };
          })
        : [{ message: 'the spreadsheet gave no usable rows: run plateau check --data <file> to see why' }],
      path,
    );
  }
  return outcome.dataset;
}
