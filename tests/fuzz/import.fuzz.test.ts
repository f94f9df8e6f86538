/**
 * Fuzz of the spreadsheet import (seeded, reproducible): random bytes, truncated and corrupted
 * zip containers, random CSV and workbooks with hostile cells (__proto__, constructor, formulas,
 * million-character strings), huge sheets, mangled templates. Every case must end in a report or
 * in a clear WorkbookError / TemplateError; nothing else may escape, and nothing may pollute
 * Object.prototype. Most cases run in-process with a row cap; a few go through the worker for
 * the time limit. Set PLATEAU_FUZZ_SEED to replay another seed.
 */
import { readFileSync } from 'node:fs';
import * as path from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import * as XLSX from 'xlsx';
import { analyseWorkbook } from '../../engine/import/analyse.js';
import { handleParseMessage } from '../../main/worker/parseWorker.js';
import { createStreams, type RngStream } from '../../engine/rng/index.js';
import { parseInWorker, ImportError } from '../../main/services/importService.js';
import { ensureWorkerBuilt, repoRoot, workerPath } from '../integration/import/workerBuild.js';

const SEED = process.env.PLATEAU_FUZZ_SEED ?? 'plateau-import-fuzz-1';
const root = createStreams(SEED);
const fixtureDir = path.join(repoRoot, 'tests/fixtures/import');
const xlsxFixtures = ['ward7b_two_sheets.xlsx', 'ward7b_one_sheet.xlsx'].map((f) => new Uint8Array(readFileSync(path.join(fixtureDir, f))));
const csvFixtures = ['ward7b_german.csv', 'ambiguous_dates.csv'].map((f) => new Uint8Array(readFileSync(path.join(fixtureDir, f))));
const MAX_ROWS = 3000;

const HOSTILE = [
  '__proto__', 'constructor', 'prototype', 'toString', 'hasOwnProperty', 'valueOf', '__defineGetter__',
  '=cmd|\' /C calc\'!A0', '=HYPERLINK("http://x")', '+1+1', '-2+3', '@SUM(A1:A2)', '<2.0', '< LOQ', 'BLQ', 'ND', '>100',
  'haemolysed', 'not received', '31/02/2024', '2024-03-31 02:30', '03/04/2024', '12,5', '1,500', '-1000', '0', 'NaN', 'Infinity',
  '1e308', '-1e-320', '', ' ', '"', '""', ';', ',', '\n', '\r\n', '\u0000', '\ufeff', 'ä', '🧪', 'IV infusion', 'oral', 'mg', 'umol/L', 'g',
];
const HEADER_WORDS = ['Patient', 'MRN', 'Date', 'Time', 'Date/time', 'Dose (mg)', 'Unit', 'Route', 'Duration (min)', 'Infusion end', 'Level', 'Result', 'Units', 'LLOQ', 'Comment', 'Weight (kg)', 'Sex', 'Date of birth', 'Creatinine', 'Event', '__proto__', 'constructor', 'Elapsed (h)'];

function pick<T>(rng: RngStream, xs: readonly T[]): T {
  return xs[rng.int(xs.length)];
}

function randomCell(rng: RngStream): string | number | boolean | null {
  const k = rng.int(10);
  if (k < 3) return pick(rng, HOSTILE);
  if (k < 5) return Math.round((rng.uniform() - 0.2) * 1e4) / 100;
  if (k === 5) return 45000 + rng.uniform() * 500;
  if (k === 6) return null;
  if (k === 7) return rng.uniform() < 0.5;
  if (k === 8) return `P${rng.int(20)}`;
  let s = '';
  const n = rng.int(30);
  for (let i = 0; i < n; i++) s += String.fromCharCode(rng.int(0x3000));
  return s;
}

function csvField(v: string | number | boolean | null): string {
  if (v === null) return '';
  const s = String(v);
  return /[",\r\n;]/.test(s) ? `"${s.replace(/"/g, '""')}"` : s;
}

function randomCsv(rng: RngStream, rows: number): Uint8Array {
  const cols = 2 + rng.int(10);
  const sep = rng.uniform() < 0.3 ? ';' : ',';
  const lines: string[] = [];
  if (rng.uniform() < 0.3) lines.push('Ward export (INVENTED)');
  lines.push(Array.from({ length: cols }, () => csvField(pick(rng, HEADER_WORDS))).join(sep));
  for (let r = 0; r < rows; r++) lines.push(Array.from({ length: cols }, () => csvField(randomCell(rng))).join(sep));
  return new TextEncoder().encode(lines.join(rng.uniform() < 0.5 ? '\n' : '\r\n'));
}

function randomWorkbook(rng: RngStream): Uint8Array {
  const wb = XLSX.utils.book_new();
  const nSheets = 1 + rng.int(3);
  const names = new Set<string>();
  for (let s = 0; s < nSheets; s++) {
    const cols = 2 + rng.int(8);
    const rows: unknown[][] = [Array.from({ length: cols }, () => pick(rng, HEADER_WORDS))];
    const n = rng.int(40);
    for (let r = 0; r < n; r++) rows.push(Array.from({ length: cols }, () => randomCell(rng)));
    const ws = XLSX.utils.aoa_to_sheet(rows);
    // Formula cells, date-formatted cells and error cells.
    for (let k = 0; k < 5; k++) {
      const addr = XLSX.utils.encode_cell({ r: 1 + rng.int(Math.max(1, n)), c: rng.int(cols) });
      const t = rng.int(3);
      if (t === 0) ws[addr] = { t: 'n', v: rng.uniform() * 100, f: 'A1*2' };
      else if (t === 1) ws[addr] = { t: 'n', v: 45000 + rng.uniform() * 400, z: 'dd/mm/yyyy' }; // no space: the ODS writer warns on it
      else ws[addr] = { t: 'e', v: 7, w: '#DIV/0!' };
    }
    let name = pick(rng, ['Doses', 'Levels', '__proto__', 'constructor', 'Sheet', 'Patients', 'toString']);
    while (names.has(name)) name += 'x';
    names.add(name);
    XLSX.utils.book_append_sheet(wb, ws, name);
  }
  return new Uint8Array(XLSX.write(wb, { type: 'array', bookType: rng.uniform() < 0.8 ? 'xlsx' : 'ods' }) as ArrayBuffer);
}

function corrupt(rng: RngStream, bytes: Uint8Array): Uint8Array {
  const out = new Uint8Array(bytes);
  const n = 1 + rng.int(20);
  for (let i = 0; i < n; i++) out[rng.int(out.length)] = rng.int(256);
  return out;
}

function mangleTemplate(rng: RngStream, t: unknown): unknown {
  const copy = JSON.parse(JSON.stringify(t));
  const junk = [null, 0, -1, 'x', [], {}, '__proto__', true, 1e9, { __proto__: { polluted: 1 } }];
  const n = 1 + rng.int(4);
  for (let i = 0; i < n; i++) {
    // Walk to a random node and replace it.
    let node: Record<string, unknown> = copy;
    for (let d = 0; d < 4; d++) {
      const keys = Object.keys(node);
      if (keys.length === 0) break;
      const k = pick(rng, keys);
      const v = node[k];
      if (d < 3 && v && typeof v === 'object' && rng.uniform() < 0.7) node = v as Record<string, unknown>;
      else {
        node[k] = pick(rng, junk);
        break;
      }
    }
  }
  return copy;
}

/**
 * One case, through the worker's own message handler in this process (zip check, then the
 * engine): it must give a sane analysis or a clear workbook / template error. An 'internal'
 * error means an unexpected exception escaped the engine: a failure.
 */
function runCase(bytes: Uint8Array, mapping?: unknown): 'report' | 'error' {
  const r = handleParseMessage({ type: 'parse', id: 'fuzz', fileName: 'fuzz.xlsx', bytes, maxRows: MAX_ROWS, ...(mapping !== undefined ? { mapping } : {}) });
  if (r.type === 'error') {
    if (r.kind === 'internal' || r.kind === 'request') throw new Error(`unexpected failure: ${r.message}`);
    if (r.message.length < 10) throw new Error('unclear error message');
    return 'error';
  }
  const a = r.analysis;
  const s = a.report.summary;
  for (const v of [s.patients, s.doses, s.levels, s.censored, s.excludedRows]) if (!(Number.isInteger(v) && v >= 0)) throw new Error(`bad summary ${JSON.stringify(s)}`);
  for (const p of a.report.problems) {
    if (p.severity !== 'error' && p.severity !== 'warning') throw new Error('bad severity');
    if (typeof p.message !== 'string' || p.message.length === 0) throw new Error('empty message');
    if (!(Number.isInteger(p.row) && p.row >= 0)) throw new Error('bad row');
  }
  if (a.dataset && a.dataset.subjects.length !== s.patients) throw new Error('summary does not match the dataset');
  return 'report';
}

describe(`import fuzz (seed ${SEED})`, () => {
  const protoBefore = Object.getOwnPropertyNames(Object.prototype).sort().join(',');
  const counts = { cases: 0, reports: 0, errors: 0 };
  const tally = (r: 'report' | 'error') => {
    counts.cases++;
    if (r === 'report') counts.reports++;
    else counts.errors++;
  };

  it('random bytes', () => {
    const rng = root.stream('bytes');
    for (let i = 0; i < 400; i++) {
      const n = rng.int(4096);
      const b = new Uint8Array(n);
      for (let j = 0; j < n; j++) b[j] = rng.int(256);
      // Some start like a zip or an old .xls.
      if (n > 4 && i % 4 === 0) b.set([0x50, 0x4b, 0x03, 0x04]);
      if (n > 8 && i % 4 === 1) b.set([0xd0, 0xcf, 0x11, 0xe0, 0xa1, 0xb1, 0x1a, 0xe1]);
      tally(runCase(b));
    }
  });

  it('truncated and corrupted zip containers', () => {
    const rng = root.stream('zip');
    for (let i = 0; i < 300; i++) {
      const src = pick(rng, xlsxFixtures);
      tally(runCase(src.subarray(0, rng.int(src.length))));
    }
    for (let i = 0; i < 400; i++) tally(runCase(corrupt(rng, pick(rng, xlsxFixtures))));
  });

  it('random CSV with hostile cells', () => {
    const rng = root.stream('csv');
    for (let i = 0; i < 600; i++) tally(runCase(randomCsv(rng, rng.int(60))));
    for (let i = 0; i < 100; i++) tally(runCase(corrupt(rng, pick(rng, csvFixtures))));
  });

  it('random workbooks with formulas, dates, errors and hostile sheet names', () => {
    const rng = root.stream('xlsx');
    for (let i = 0; i < 250; i++) tally(runCase(randomWorkbook(rng)));
  });

  it('mangled templates applied to the fixtures', () => {
    const rng = root.stream('template');
    const base = xlsxFixtures.map((b) => analyseWorkbook(b).mapping);
    for (let i = 0; i < 200; i++) {
      const k = rng.int(xlsxFixtures.length);
      tally(runCase(xlsxFixtures[k], mangleTemplate(rng, base[k])));
    }
  });

  it('huge sheets and million-character strings', () => {
    const rng = root.stream('huge');
    const rows = ['Patient,Date/time,Dose (mg),Route,Level,Units'];
    for (let i = 0; i < 200_000; i++) rows.push(`P${i % 500},2024-03-${String(1 + (i % 28)).padStart(2, '0')} 08:00,1000,iv,,`);
    const huge = new TextEncoder().encode(rows.join('\n'));
    tally(runCase(huge));
    const long = 'x'.repeat(1_000_000);
    tally(runCase(new TextEncoder().encode(`Patient,Level,Comment\n${long},${long},${long}\n`)));
    const ws = XLSX.utils.aoa_to_sheet([['Patient', 'Comment'], ['P1', long], [long, '=1+1']]);
    const wb = XLSX.utils.book_new();
    XLSX.utils.book_append_sheet(wb, ws, 'S');
    // .xlsx caps a cell at 32,767 characters on writing; .ods does not.
    tally(runCase(new Uint8Array(XLSX.write(wb, { type: 'array', bookType: 'ods' }) as ArrayBuffer)));
    for (let i = 0; i < 5; i++) tally(runCase(randomCsv(rng, 2000)));
  });

  it('ran at least 2000 cases without pollution', () => {
    expect(counts.cases).toBeGreaterThanOrEqual(2000);
    expect(counts.reports).toBeGreaterThan(0);
    expect(counts.errors).toBeGreaterThan(0);
    expect(Object.getOwnPropertyNames(Object.prototype).sort().join(',')).toBe(protoBefore);
    expect(({} as Record<string, unknown>).polluted).toBeUndefined();
  });
});

describe('import fuzz through the worker (time limit)', () => {
  beforeAll(() => ensureWorkerBuilt(), 200_000);

  it('ends every case with a result or a clear error, and kills at the time limit', async () => {
    const rng = root.stream('worker');
    const inputs: Uint8Array[] = [];
    for (let i = 0; i < 4; i++) inputs.push(corrupt(rng, pick(rng, xlsxFixtures)));
    inputs.push(randomCsv(rng, 50));
    for (const bytes of inputs) {
      const r = await parseInWorker({ fileName: 'fuzz.xlsx', bytes }, { workerPath, timeLimitMs: 20_000 }).then(
        () => 'result',
        (e: unknown) => {
          expect(e).toBeInstanceOf(ImportError);
          expect((e as ImportError).message.length).toBeGreaterThan(10);
          return (e as ImportError).kind;
        },
      );
      expect(['result', 'workbook', 'template']).toContain(r);
    }
    // A big input with a tiny limit: stopped, not hung.
    const rows = ['Patient,Date/time,Dose (mg),Route'];
    for (let i = 0; i < 300_000; i++) rows.push(`P${i % 900},2024-03-01 08:00,1000,iv`);
    const err = await parseInWorker({ fileName: 'big.csv', bytes: new TextEncoder().encode(rows.join('\n')) }, { workerPath, timeLimitMs: 300 }).catch((e: unknown) => e);
    expect(err).toBeInstanceOf(ImportError);
    expect((err as ImportError).kind).toBe('timeout');
  });
});
