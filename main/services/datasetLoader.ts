/**
 * Load a dataset from a file for the CLI, the worker and the app. Canonical CSV is read here;
 * spreadsheets (.xlsx, .xls, .ods, or any file with a mapping template) go to the spreadsheet
 * branch in spreadsheetDataset.ts, which exports
 *   loadSpreadsheetDataset(path: string, mappingPath: string | undefined): Promise<Dataset>
 * and is loaded only when needed, so this module works before that branch exists.
 */
import * as path from 'node:path';
import { isCanonicalCsv, parseCanonicalCsvDetailed } from '../../engine/data/canonicalCsv.js';
// The decoder alone, not the spreadsheet reader: a canonical CSV never loads SheetJS.
import { decodeTextChecked } from '../../engine/import/textDecode.js';
import { DataError, type Dataset } from '../../engine/data/types.js';
import { readRegularFile } from './fileGuard.js';

export interface LoadDatasetOptions {
  /** Spreadsheet mapping template file. Sends even a .csv to the spreadsheet branch. */
  mapping?: string;
}

/** A file that cannot be loaded as a dataset, with what to do about it. */
export class DatasetLoadError extends Error {
  readonly file: string;
  constructor(file: string, message: string) {
    super(message);
    this.name = 'DatasetLoadError';
    this.file = file;
  }
}

export type SpreadsheetDatasetLoader = (file: string, mappingPath: string | undefined) => Promise<Dataset>;

const SPREADSHEET_EXTENSIONS = new Set(['.xlsx', '.xlsm', '.xls', '.ods']);

/** True when the file goes to the spreadsheet branch. */
export function isSpreadsheetPath(file: string, options: LoadDatasetOptions = {}): boolean {
  return SPREADSHEET_EXTENSIONS.has(path.extname(file).toLowerCase()) || options.mapping !== undefined;
}

let spreadsheetLoaderOverride: SpreadsheetDatasetLoader | undefined;

/** Install a spreadsheet loader by hand (tests, or a host that bundles its own). */
export function setSpreadsheetDatasetLoader(loader: SpreadsheetDatasetLoader | undefined): void {
  spreadsheetLoaderOverride = loader;
}

async function spreadsheetLoader(file: string): Promise<SpreadsheetDatasetLoader> {
  if (spreadsheetLoaderOverride) return spreadsheetLoaderOverride;
  // A computed specifier, so this module compiles and runs before spreadsheetDataset.ts exists.
  const specifier = './spreadsheetDataset.js';
  let mod: { loadSpreadsheetDataset?: unknown };
  try {
    mod = (await import(specifier)) as { loadSpreadsheetDataset?: unknown };
  } catch (e) {
    const code = (e as NodeJS.ErrnoException).code;
    if (code === 'ERR_MODULE_NOT_FOUND' && String((e as Error).message).includes('spreadsheetDataset')) {
      throw new DatasetLoadError(file, `cannot read ${file}: spreadsheet import is not available in this build; save the data as Plateau's canonical CSV (see README, "Data format")`);
    }
    throw e;
  }
  if (typeof mod.loadSpreadsheetDataset !== 'function') {
    throw new DatasetLoadError(file, `cannot read ${file}: the spreadsheet import module does not export loadSpreadsheetDataset`);
  }
  return mod.loadSpreadsheetDataset as SpreadsheetDatasetLoader;
}

/** Read a dataset file. Problems in the data throw a DataError naming the file and every bad row. */
export async function loadDataset(file: string, options: LoadDatasetOptions = {}): Promise<Dataset> {
  if (isSpreadsheetPath(file, options)) return (await spreadsheetLoader(file))(file, options.mapping);
  let text: string;
  let encodingDamage: { line: number; message: string } | undefined;
  try {
    // Regular files only, size checked before reading (fileGuard.ts); decoded as check decodes
    // it (UTF-8, UTF-16 by BOM, Latin-1), damaged UTF-8 named, not replaced silently.
    const decoded = decodeTextChecked(new Uint8Array(await readRegularFile(file, { what: 'data file' })));
    text = decoded.text;
    encodingDamage = decoded.damage;
  } catch (e) {
    throw new DatasetLoadError(file, (e as Error).message);
  }
  // Any other CSV is an export: it goes the way `check` reads it (suggested mapping, same rules).
  if (!isCanonicalCsv(text)) return (await spreadsheetLoader(file))(file, undefined);
  try {
    return parseCanonicalCsvDetailed(text, encodingDamage).dataset;
  } catch (e) {
    if (e instanceof DataError) throw new DataError(e.problems, file);
    throw e;
  }
}
