/**
 * Issue 11, findings 3 and 8 (damaged input): each reproduced from a committed file.
 * - resources/demo/ward-levels.csv written as .xls (tests/fuzz/corpus.ts): one flipped byte, and
 *   every truncation.
 * - resources/demo/ward-levels.csv itself, truncated.
 * - tests/fixtures/import/ward7b_one_sheet.xlsx with a shared-string index out of range.
 */
import { describe, expect, it } from 'vitest';
import * as XLSX from 'xlsx';
import { analyseWorkbook } from '../../../engine/import/analyse.js';
import { WorkbookError } from '../../../engine/import/workbook.js';
import { parseCanonicalCsv } from '../../../engine/data/canonicalCsv.js';
import { DataError } from '../../../engine/data/types.js';
import { demoText, demoWorkbookBytes } from '../../fuzz/corpus.js';
import { readXlsxEntries } from '../../../engine/import/xlsxFast.js';
import { readWorkbook, serialText, decodeText } from '../../../engine/import/workbook.js';
import { inspectZipContainer } from '../../../main/worker/limits.js';
import { fixtureBytes } from '../../fuzz/corpus.js';

const quiet = <T>(f: () => T): T => {
  // SheetJS prints "Missing Info for XLS Record" for damaged records; keep the test output readable.
  const warn = console.error;
  console.error = () => {};
  try {
    return f();
  } finally {
    console.error = warn;
  }
};

function sheetJsRows(bytes: Uint8Array): number | undefined {
  try {
    const wb = quiet(() => XLSX.read(bytes, { type: 'array', dense: true }));
    const ws = wb.Sheets[wb.SheetNames[0]] as unknown as { '!data'?: unknown[][] };
    return (ws['!data'] ?? []).filter((r) => r && r.some((c) => c)).length;
  } catch {
    return undefined;
  }
}

describe('damaged .xls (resources/demo/ward-levels.csv as .xls)', () => {
  const xls = demoWorkbookBytes('biff8');
  const whole = sheetJsRows(xls)!;

  it('a flipped byte that makes the parser stop early is reported, never read as the whole file', () => {
    // The first 40 lines of the demo keep this test quick; the fuzz suite flips more.
    const xls = demoWorkbookBytes('biff8', 40);
    const whole = sheetJsRows(xls)!;
    // Find the flips after which the parser returns fewer rows without an error (the finding: 42 of 370 rows, 0 problems).
    let partial = 0;
    for (let i = 0; i < xls.length; i += 6) {
      const bad = new Uint8Array(xls);
      bad[i] ^= 0x10;
      const rows = sheetJsRows(bad);
      if (rows === undefined || rows >= whole) continue;
      partial++;
      let errors: number;
      try {
        errors = quiet(() => analyseWorkbook(bad)).report.problems.filter((p) => p.severity === 'error').length;
      } catch (e) {
        expect(e).toBeInstanceOf(WorkbookError);
        continue;
      }
      expect(errors, `flip at byte ${i}: ${rows} of ${whole} rows read`).toBeGreaterThan(0);
    }
    expect(partial).toBeGreaterThan(0);
  }, 240_000);

  it('a truncated .xls gives a clear message naming the damage, with no internal exception text', () => {
    for (let cut = 600; cut < xls.length - 600; cut += 1500) {
      let message = '';
      try {
        const a = quiet(() => analyseWorkbook(xls.subarray(0, cut)));
        message = a.report.problems.find((p) => p.severity === 'error')?.message ?? '';
        if (!message) expect(a.report.summary.patients).toBe(48); // a cut in the trailing padding loses nothing
      } catch (e) {
        expect(e).toBeInstanceOf(WorkbookError);
        message = (e as Error).message;
      }
      if (message) {
        expect(message).toMatch(/damaged|cut short/);
        expect(message).not.toMatch(/Cannot (set|read) properties|undefined|TypeError/);
      }
    }
  });

  it('the undamaged file reads whole with no damage', () => {
    const a = quiet(() => analyseWorkbook(xls));
    expect(a.report.problems.filter((p) => p.severity === 'error')).toEqual([]);
    expect(a.report.summary).toMatchObject({ patients: 48, doses: 278, levels: 92 });
  });
});

describe('truncated CSV (resources/demo/ward-levels.csv)', () => {
  const text = demoText();

  it('a file cut inside its last row is refused by the canonical reader (fit, simulate) and by check', () => {
    let cuts = 0;
    for (let cut = 200; cut < text.length - 1; cut += 613) {
      const part = text.slice(0, cut);
      if (part.endsWith('\n')) continue;
      cuts++;
      expect(() => parseCanonicalCsv(part)).toThrow(DataError);
      try {
        parseCanonicalCsv(part);
      } catch (e) {
        expect((e as DataError).problems.some((p) => /cut short/.test(p.message))).toBe(true);
      }
      const a = analyseWorkbook(new TextEncoder().encode(part));
      expect(a.report.problems.some((p) => p.severity === 'error' && /cut short/.test(p.message))).toBe(true);
    }
    expect(cuts).toBeGreaterThan(10);
  });

  it('an export CSV (not canonical) cut inside a row is reported too', () => {
    const csv = 'Patient,Date/time,Dose (mg),Level (mg/L)\nA,2024-03-01 08:00,1000,\nA,2024-03-01 20:00,,12.4';
    const a = analyseWorkbook(new TextEncoder().encode(csv));
    expect(a.report.problems.some((p) => p.severity === 'error' && /line 3\).*cut short/.test(p.message))).toBe(true);
  });
});

describe('a bad shared-string index (tests/fixtures/import/ward7b_one_sheet.xlsx, cell A3 made a shared-string cell)', () => {
  it('names the sheet and the cell instead of turning the sheet into 0 rows', () => {
    const zip = inspectZipContainer(fixtureBytes('ward7b_one_sheet.xlsx'));
    if (!zip.ok) throw new Error(zip.reason);
    const entries = new Map(zip.entries);
    const sheetPath = [...entries.keys()].find((k) => /worksheets\/sheet1\.xml$/.test(k))!;
    const xml = decodeText(entries.get(sheetPath)!);
    // The first shared-string cell now points past the end of the table.
    const damaged = xml.replace(/<c r="A3" t="str"><v>[^<]*<\/v><\/c>/, '<c r="A3" t="s"><v>99999</v></c>');
    expect(damaged).not.toBe(xml);
    entries.set(sheetPath, new TextEncoder().encode(damaged));
    const r = readXlsxEntries((p) => entries.get(p), { maxCellChars: 1000, serialText, decode: decodeText });
    expect(r).toBeDefined();
    expect(r!.damage.length).toBe(1);
    expect(r!.damage[0].message).toMatch(/shared string 99999/);
    expect(r!.sheets[0].rows.length).toBeGreaterThan(5);
    const model = readWorkbook(fixtureBytes('ward7b_one_sheet.xlsx'), { zipEntries: (p) => entries.get(p) });
    expect(model.damage?.[0].message).toMatch(/shared string/);
  });
});

describe('a broken byte in a UTF-8 file (tests/fixtures/import/ward7b_german.csv)', () => {
  it('is named as damage, not read as Latin-1 (which changed every accented letter silently)', () => {
    const bytes = new Uint8Array(fixtureBytes('ward7b_german.csv'));
    const text = new TextDecoder().decode(bytes);
    expect(text).toMatch(/[äöüÄÖÜß]/); // the fixture holds UTF-8 letters
    const at = bytes.indexOf(0x0a, 200) + 3; // inside a data line
    bytes[at] = 0xff; // never valid in UTF-8
    const a = analyseWorkbook(bytes);
    const damage = a.report.problems.filter((p) => p.severity === 'error' && /not valid UTF-8/.test(p.message));
    expect(damage.length).toBe(1);
    expect(damage[0].message).toMatch(/line \d+/);
  });
});
