import { describe, expect, it } from 'vitest';
import * as XLSX from 'xlsx';
import { readWorkbook, detectHeaderRow, profileColumns, columnLetter, columnIndex, decodeText, WorkbookError, previewWorkbook } from '../../../engine/import/workbook.js';

function xlsxBytes(sheets: [string, unknown[][]][]): Uint8Array {
  const wb = XLSX.utils.book_new();
  for (const [name, rows] of sheets) XLSX.utils.book_append_sheet(wb, XLSX.utils.aoa_to_sheet(rows), name);
  return new Uint8Array(XLSX.write(wb, { type: 'array', bookType: 'xlsx' }) as ArrayBuffer);
}
const utf8 = (s: string) => new TextEncoder().encode(s);

describe('reading workbooks', () => {
  it('keeps rows as the spreadsheet numbers them, skipping titles for the header', () => {
    const bytes = xlsxBytes([['Doses', [['Ward export (INVENTED)'], [], ['Patient', 'Time', 'Dose (mg)'], ['P1', 1.5, 1000], [], ['P2', 3, 500]]]]);
    const m = readWorkbook(bytes);
    expect(m.format).toBe('xlsx');
    const s = m.sheets[0];
    expect(s.name).toBe('Doses');
    expect(detectHeaderRow(s)).toBe(2);
    expect(s.rows[3][0]).toEqual({ kind: 'text', raw: 'P1', text: 'P1' });
    expect(s.rows[5][2]).toMatchObject({ kind: 'number', raw: 500 });
    const prof = profileColumns(s, 2);
    expect(prof.map((p) => [p.letter, p.header, p.type])).toEqual([['A', 'Patient', 'text'], ['B', 'Time', 'number'], ['C', 'Dose (mg)', 'number']]);
    expect(previewWorkbook(m)[0].headerRow).toBe(3);
  });

  it('marks date-formatted cells as dates and keeps the serial', () => {
    const ws = XLSX.utils.aoa_to_sheet([['Patient', 'When'], ['P1', 45382.5]]);
    ws['B2'] = { t: 'n', v: 45382.5, z: 'dd/mm/yyyy hh:mm' };
    const wb = XLSX.utils.book_new();
    XLSX.utils.book_append_sheet(wb, ws, 'S');
    const m = readWorkbook(new Uint8Array(XLSX.write(wb, { type: 'array', bookType: 'xlsx' }) as ArrayBuffer));
    expect(m.sheets[0].rows[1][1]).toMatchObject({ kind: 'date', raw: 45382.5, text: '2024-03-31 12:00' });
  });

  it('never evaluates formulas and keeps formula-looking text as text', () => {
    const ws = XLSX.utils.aoa_to_sheet([['Patient', 'Level'], ['=HYPERLINK("x")', 5]]);
    ws['B2'] = { t: 'n', v: 7, f: 'A1*1000' };
    const wb = XLSX.utils.book_new();
    XLSX.utils.book_append_sheet(wb, ws, 'S');
    const m = readWorkbook(new Uint8Array(XLSX.write(wb, { type: 'array', bookType: 'xlsx' }) as ArrayBuffer));
    expect(m.sheets[0].rows[1][0]).toMatchObject({ kind: 'text', raw: '=HYPERLINK("x")' });
    expect(m.sheets[0].rows[1][1]).toMatchObject({ kind: 'number', raw: 7 }); // the cached value only
  });

  it('reads CSV as text: UTF-8 without BOM, Latin-1, UTF-16, semicolons', () => {
    const m = readWorkbook(utf8('Patient;Spiegel;Bemerkung\nA;<2,0;hämolysiert\n'));
    expect(m.format).toBe('csv');
    expect(m.sheets[0].rows[1].map((c) => c?.text)).toEqual(['A', '<2,0', 'hämolysiert']);
    expect(decodeText(new Uint8Array([0x68, 0xe4, 0x6d]))).toBe('häm'); // invalid UTF-8 -> Latin-1
    expect(decodeText(new Uint8Array([0xff, 0xfe, 0x41, 0, 0xe4, 0]))).toBe('Aä');
    expect(decodeText(new Uint8Array([0xef, 0xbb, 0xbf, 0x41]))).toBe('A');
  });

  it('gives a clear error for empty, binary and damaged files', () => {
    expect(() => readWorkbook(new Uint8Array(0))).toThrow(WorkbookError);
    expect(() => readWorkbook(new Uint8Array([0, 1, 2, 3, 0, 0, 0, 9, 200, 0]))).toThrow(/not a spreadsheet/);
    const good = xlsxBytes([['S', [['a', 'b'], [1, 2]]]]);
    expect(() => readWorkbook(good.subarray(0, Math.floor(good.length / 2)))).toThrow(WorkbookError);
  });

  it('caps rows and very long cells', () => {
    const rows = ['id,v'];
    for (let i = 0; i < 100; i++) rows.push(`p${i},${i}`);
    rows.push(`x,${'y'.repeat(100_000)}`);
    const m = readWorkbook(utf8(rows.join('\n')), { maxRows: 10, maxCellChars: 50 });
    expect(m.sheets[0].rows.length).toBe(10);
    expect(m.sheets[0].truncated).toBe(true);
    const m2 = readWorkbook(utf8(rows.join('\n')), { maxCellChars: 50 });
    expect(m2.sheets[0].rows[101][1]!.text.length).toBe(51);
  });

  it('does not build objects keyed by cell contents', () => {
    const before = Object.getOwnPropertyNames(Object.prototype).length;
    const bytes = xlsxBytes([['__proto__', [['__proto__', 'constructor', 'toString'], ['__proto__', '{"polluted":1}', 'x']]]]);
    const m = readWorkbook(bytes);
    expect(m.sheets[0].name).toBe('__proto__');
    expect(({} as Record<string, unknown>).polluted).toBeUndefined();
    expect(Object.getOwnPropertyNames(Object.prototype).length).toBe(before);
  });

  it('converts column letters both ways', () => {
    expect([0, 25, 26, 27, 701, 702].map(columnLetter)).toEqual(['A', 'Z', 'AA', 'AB', 'ZZ', 'AAA']);
    expect(['A', 'Z', 'AA', 'AAA'].map(columnIndex)).toEqual([0, 25, 26, 702]);
  });
});
