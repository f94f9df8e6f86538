/** The direct .xlsx reader gives the same neutral model as SheetJS (cell kinds and values). */
import { readFileSync } from 'node:fs';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import * as XLSX from 'xlsx';
import { readWorkbook, type WorkbookModel } from '../../../engine/import/workbook.js';
import { createStreams } from '../../../engine/rng/index.js';

const dir = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '../../fixtures/import');

/** Kind and value of every cell; text only for text cells (number and date display text differ by design). */
function cells(m: WorkbookModel) {
  return m.sheets.map((s) => ({
    name: s.name,
    rows: s.rows.map((r) => Array.from(r, (c) => (c ? [c.kind, typeof c.raw === 'number' ? Math.round(c.raw * 1e9) / 1e9 : c.raw] : null))).map((r) => {
      while (r.length && r[r.length - 1] === null) r.pop();
      return r;
    }),
  }));
}

describe('direct .xlsx reader', () => {
  it.each(['ward7b_two_sheets.xlsx', 'ward7b_one_sheet.xlsx', 'ward7b_openpyxl.xlsx'])('agrees with SheetJS on %s', (f) => {
    const bytes = new Uint8Array(readFileSync(path.join(dir, f)));
    const fast = readWorkbook(bytes);
    const slow = readWorkbook(bytes, { sheetJsOnly: true });
    expect(cells(fast)).toEqual(cells(slow));
    expect(fast.date1904).toBe(slow.date1904);
  });

  it('reads the openpyxl workbook (shared strings or inline strings, styled dates, entities)', () => {
    const m = readWorkbook(new Uint8Array(readFileSync(path.join(dir, 'ward7b_openpyxl.xlsx'))));
    const s = m.sheets[0];
    expect(s.name).toBe('Lab & MAR <export>');
    expect(s.rows[3][2]).toMatchObject({ kind: 'date', text: '2024-03-30 20:00' });
    expect(s.rows[3][5]).toMatchObject({ kind: 'text', raw: 'über 60 min & ok' });
    expect(s.rows[4][5]).toMatchObject({ raw: 'trough <pre-dose>' });
    expect(s.rows[6][3]).toMatchObject({ kind: 'number', raw: -5 });
    expect(s.rows[7][2]).toMatchObject({ kind: 'date', text: '14:45' });
    expect(m.sheets[1].rows[1][2]).toMatchObject({ kind: 'date', text: '1950-01-02' });
    expect(m.sheets[1].rows[2][2]).toMatchObject({ kind: 'date', raw: 0 }); // 1899-12-31 is serial 0, shown as a time
  });

  it('agrees with SheetJS on random SheetJS-written workbooks', () => {
    const rng = createStreams('xlsx-fast').stream('books');
    for (let k = 0; k < 30; k++) {
      const rows: unknown[][] = [];
      for (let r = 0; r < 30; r++) {
        const row: unknown[] = [];
        for (let c = 0; c < 8; c++) {
          const t = rng.int(6);
          row.push(t === 0 ? null : t === 1 ? rng.uniform() * 1e4 - 5e3 : t === 2 ? `s<${rng.int(100)}>&"'` : t === 3 ? rng.uniform() < 0.5 : t === 4 ? `__proto__${c}` : `é${'x'.repeat(rng.int(50))}`);
        }
        rows.push(row);
      }
      const ws = XLSX.utils.aoa_to_sheet(rows);
      ws['B3'] = { t: 'n', v: 45000.25, z: 'dd/mm/yyyy hh:mm' };
      ws['C4'] = { t: 'e', v: 7 };
      const wb = XLSX.utils.book_new();
      XLSX.utils.book_append_sheet(wb, ws, `S${k}`);
      const bytes = new Uint8Array(XLSX.write(wb, { type: 'array', bookType: 'xlsx', bookSST: rng.uniform() < 0.5 }) as ArrayBuffer);
      expect(cells(readWorkbook(bytes))).toEqual(cells(readWorkbook(bytes, { sheetJsOnly: true })));
    }
  });
});
