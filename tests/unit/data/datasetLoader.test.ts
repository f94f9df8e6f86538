import { existsSync, mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { DataError } from '../../../engine/data/types.js';
import { DatasetLoadError, isSpreadsheetPath, loadDataset, setSpreadsheetDatasetLoader } from '../../../main/services/datasetLoader.js';

const dir = mkdtempSync(path.join(tmpdir(), 'plateau-load-'));

/** Every module a TypeScript file loads by static imports (type-only imports left out), bare package names as they are. */
function staticImports(file: string, seen = new Set<string>()): Set<string> {
  if (seen.has(file)) return seen;
  seen.add(file);
  const src = readFileSync(file, 'utf8');
  for (const m of src.matchAll(/^(?:import|export)\s+(?!type\b)[^;]*?from\s+'([^']+)'/gm)) {
    const spec = m[1];
    if (!spec.startsWith('.')) seen.add(spec);
    else {
      const ts = path.resolve(path.dirname(file), spec).replace(/\.js$/, '.ts');
      if (existsSync(ts)) staticImports(ts, seen);
    }
  }
  return seen;
}

describe('loadDataset', () => {
  afterEach(() => setSpreadsheetDatasetLoader(undefined));

  it('reads canonical CSV', async () => {
    const f = path.join(dir, 'ok.csv');
    writeFileSync(f, 'subject,time_h,event,amount_mg,conc_mg_L\nA,0,dose,100,\nA,1,level,,2\n');
    const ds = await loadDataset(f);
    expect(ds.subjects[0].observations[0].valueMgL).toBe(2);
  });

  it('reading a canonical CSV does not load the spreadsheet library (its start-up cost, about 40 ms, is on every fit)', () => {
    const graph = staticImports(path.resolve(__dirname, '../../../main/services/datasetLoader.ts'));
    expect(graph.has(path.resolve(__dirname, '../../../engine/data/canonicalCsv.ts'))).toBe(true);
    expect(graph.has('xlsx')).toBe(false);
    // The check itself sees the library where it is imported.
    expect(staticImports(path.resolve(__dirname, '../../../engine/import/workbook.ts')).has('xlsx')).toBe(true);
  });

  it('names the file in data problems and in read errors', async () => {
    const f = path.join(dir, 'bad.csv');
    writeFileSync(f, 'subject,time_h,event,amount_mg\nA,-2,dose,100\n');
    const e = await loadDataset(f).catch((x) => x);
    expect(e).toBeInstanceOf(DataError);
    expect((e as DataError).source).toBe(f);
    expect((e as DataError).message).toContain(f);
    await expect(loadDataset(path.join(dir, 'none.csv'))).rejects.toThrow(DatasetLoadError);
    await expect(loadDataset(dir)).rejects.toThrow(/is a folder/);
  });

  it('sends spreadsheets and mapped files to the spreadsheet branch', async () => {
    expect(isSpreadsheetPath('a.XLSX')).toBe(true);
    expect(isSpreadsheetPath('a.ods')).toBe(true);
    expect(isSpreadsheetPath('a.csv')).toBe(false);
    expect(isSpreadsheetPath('a.csv', { mapping: 't.json' })).toBe(true);
    const calls: [string, string | undefined][] = [];
    setSpreadsheetDatasetLoader(async (file, mapping) => {
      calls.push([file, mapping]);
      throw new DataError([{ row: 3, message: 'stub' }]);
    });
    await expect(loadDataset('book.xlsx')).rejects.toThrow(/stub/);
    await expect(loadDataset('export.csv', { mapping: 'tmpl.json' })).rejects.toThrow(/stub/);
    expect(calls).toEqual([
      ['book.xlsx', undefined],
      ['export.csv', 'tmpl.json'],
    ]);
  });
});
