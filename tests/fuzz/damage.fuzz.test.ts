/**
 * Damage fuzz (issue 11): truncated, bit-flipped and overwritten copies of real files, plus
 * hostile text, each read the way the worker reads it (zip check, then the import). Originals:
 * the demo export (resources/demo/ward-levels.csv, invented) as .csv, .xls, .ods and .xlsx
 * (tests/fuzz/corpus.ts), and the import fixtures (tests/fixtures/import). Seeded and
 * reproducible (PLATEAU_FUZZ_SEED replays another seed). Prints its counts.
 *
 * Every case ends as one of:
 * - clear error: the file is refused, or the report has at least one error (nothing is used
 *   silently: fit, simulate and dose refuse a file whose report has errors);
 * - unchanged: no error and the same dataset as the original (damage in padding, metadata or a
 *   title line);
 * - value edit: no error, the same rows, and the differences in one row (or the sheet's name).
 *   Only for .csv and .xls, which carry no checksum: a flipped bit inside a number or a word is
 *   a different, valid value to any reader. Counted and printed, not hidden. (.xlsx and .ods are zip files with CRC-32 per
 *   entry: there any difference is a silent change.)
 * - cut at a line end: a CSV cut exactly after a line break is a shorter, whole CSV; no reader
 *   can tell. Counted apart.
 * - silent change: no error and different rows (lost, added, moved, or more than one cell
 *   changed). Must be 0.
 * - crash: an exception, an "internal" error, or internal exception text in a message. Must be 0.
 * - hang: a case slower than HANG_MS. Must be 0 (the worker's time limit is the backstop).
 */
import { describe, expect, it } from 'vitest';
import { handleParseMessage } from '../../main/worker/parseWorker.js';
import { inspectZipContainer } from '../../main/worker/limits.js';
import { readWorkbook, type WorkbookModel } from '../../engine/import/workbook.js';
import { printable } from '../../engine/text/printable.js';
import { createStreams, type RngStream } from '../../engine/rng/index.js';
import { demoText, demoWorkbookBytes, fixtureBytes } from './corpus.js';

const SEED = process.env.PLATEAU_FUZZ_SEED ?? 'plateau-damage-fuzz-1';
const HANG_MS = 10_000;
const INTERNAL_TEXT = /Cannot (read|set) properties|is not a function|is not iterable|of undefined|TypeError|RangeError|ReferenceError|Maximum call stack/;

type Kind = 'csv' | 'xls' | 'ods' | 'xlsx';
interface Original {
  name: string;
  kind: Kind;
  bytes: Uint8Array;
}

const counts = { inputs: 0, clearErrors: 0, unchanged: 0, valueEdits: 0, cutAtLineEnd: 0, silentChanges: 0, crashes: 0, hangs: 0 };
const findings: string[] = [];

function quiet<T>(f: () => T): T {
  // SheetJS prints "Missing Info for XLS Record" on damaged records: keep the output to the counts.
  const e = console.error;
  const w = console.warn;
  console.error = () => {};
  console.warn = () => {};
  try {
    return f();
  } finally {
    console.error = e;
    console.warn = w;
  }
}

/** The cells as the worker reads them (zip entries checked and inflated first). */
function cellsOf(bytes: Uint8Array): WorkbookModel | undefined {
  try {
    let zipEntries: ((p: string) => Uint8Array | undefined) | undefined;
    if (bytes[0] === 0x50 && bytes[1] === 0x4b) {
      const z = inspectZipContainer(bytes);
      if (!z.ok) return undefined;
      zipEntries = (p) => z.entries.get(p);
    }
    return quiet(() => readWorkbook(bytes, zipEntries ? { zipEntries } : {}));
  } catch {
    return undefined;
  }
}

/**
 * How the cells differ: 'same'; 'one place' when every difference is in one row of one sheet
 * (or is the sheet's name) and the rows holding values are the same; else 'rows' (rows lost,
 * added or moved, or changes in several places).
 */
/** A row with visible text (a blank line turned into a control character holds no data). */
const holdsText = (r: (WorkbookModel['sheets'][number]['rows'][number])) => r.some((c) => c !== undefined && c.text.replace(/[\u0000-\u0020\u007f]/g, '') !== '');

function cellDifference(a: WorkbookModel, b: WorkbookModel): 'same' | 'one place' | 'rows' {
  if (a.sheets.length !== b.sheets.length) return 'rows';
  const places = new Set<string>();
  for (let s = 0; s < a.sheets.length; s++) {
    const ra = a.sheets[s].rows.filter(holdsText);
    const rb = b.sheets[s].rows.filter(holdsText);
    if (ra.length !== rb.length) return 'rows';
    if (a.sheets[s].name !== b.sheets[s].name) places.add(`name ${s}`);
    for (let r = 0; r < ra.length; r++) {
      const n = Math.max(ra[r].length, rb[r].length);
      for (let c = 0; c < n; c++) if ((ra[r][c]?.text ?? '') !== (rb[r][c]?.text ?? '')) places.add(`${s}:${r}`);
    }
  }
  return places.size === 0 ? 'same' : places.size === 1 ? 'one place' : 'rows';
}

const datasetKey = (d: unknown) => JSON.stringify(d ?? null, (k, v) => (k === 'sourceRow' ? undefined : v));
const originalDatasets = new Map<string, string>();
function originalDataset(o: Original): string {
  let k = originalDatasets.get(o.name);
  if (k === undefined) {
    const r = quiet(() => handleParseMessage({ type: 'parse', id: 'o', fileName: o.name, bytes: o.bytes }));
    k = datasetKey(r.type === 'result' ? r.analysis.dataset : undefined);
    originalDatasets.set(o.name, k);
  }
  return k;
}

function runCase(original: Original, bytes: Uint8Array, label: string, cutAtLineEnd = false): void {
  counts.inputs++;
  const t0 = performance.now();
  let r: ReturnType<typeof handleParseMessage>;
  try {
    r = quiet(() => handleParseMessage({ type: 'parse', id: 'fuzz', fileName: original.name, bytes }));
  } catch (e) {
    counts.crashes++;
    findings.push(`crash ${label}: ${(e as Error).message}`);
    return;
  }
  const ms = performance.now() - t0;
  if (ms > HANG_MS) {
    counts.hangs++;
    findings.push(`hang ${label}: ${ms.toFixed(0)} ms`);
  }
  if (r.type === 'error') {
    if (r.kind === 'internal' || r.kind === 'request' || INTERNAL_TEXT.test(r.message)) {
      counts.crashes++;
      findings.push(`crash ${label}: ${r.message.slice(0, 200)}`);
    } else counts.clearErrors++;
    return;
  }
  const problems = r.analysis.report.problems;
  const leak = problems.find((p) => INTERNAL_TEXT.test(p.message));
  if (leak) {
    counts.crashes++;
    findings.push(`internal text ${label}: ${leak.message.slice(0, 200)}`);
    return;
  }
  if (problems.some((p) => p.severity === 'error')) {
    counts.clearErrors++;
    return;
  }
  if (cutAtLineEnd) {
    counts.cutAtLineEnd++;
    return;
  }
  // The same dataset as the original's: nothing the import uses changed (a title line, padding).
  if (datasetKey(r.analysis.dataset) === originalDataset(original)) {
    counts.unchanged++;
    return;
  }
  const before = cellsOf(original.bytes)!;
  const after = cellsOf(bytes);
  const diff = after ? cellDifference(before, after) : 'rows';
  if (diff === 'same') counts.unchanged++;
  else if (diff === 'one place' && (original.kind === 'csv' || original.kind === 'xls')) counts.valueEdits++;
  else {
    counts.silentChanges++;
    findings.push(`silent change ${label}: ${diff === 'rows' ? 'different rows' : 'a changed value in a checksummed file'}, no error reported`);
  }
}

const root = createStreams(SEED);

function originals(): Original[] {
  const enc = (t: string) => new TextEncoder().encode(t);
  return [
    { name: 'ward-levels.csv', kind: 'csv', bytes: enc(demoText(80)) },
    { name: 'ward-levels-export.csv', kind: 'csv', bytes: enc(demoText(80).replace(/^subject,/, 'Patient,')) },
    { name: 'ward-levels.xls', kind: 'xls', bytes: demoWorkbookBytes('biff8', 60) },
    { name: 'ward-levels.ods', kind: 'ods', bytes: demoWorkbookBytes('ods', 60) },
    { name: 'ward-levels.xlsx', kind: 'xlsx', bytes: demoWorkbookBytes('xlsx', 60) },
    { name: 'ward7b_two_sheets.xlsx', kind: 'xlsx', bytes: fixtureBytes('ward7b_two_sheets.xlsx') },
    { name: 'ward7b_openpyxl.xlsx', kind: 'xlsx', bytes: fixtureBytes('ward7b_openpyxl.xlsx') },
    { name: 'ward7b_german.csv', kind: 'csv', bytes: fixtureBytes('ward7b_german.csv') },
  ];
}

function isLineEnd(bytes: Uint8Array, cut: number): boolean {
  return cut > 0 && (bytes[cut - 1] === 10 || bytes[cut - 1] === 13);
}

describe(`damage fuzz (seed ${SEED})`, () => {
  const files = originals();

  it('the originals read with no error', () => {
    for (const o of files) {
      const r = quiet(() => handleParseMessage({ type: 'parse', id: 'o', fileName: o.name, bytes: o.bytes }));
      expect(r.type, o.name).toBe('result');
      if (r.type !== 'result') continue;
      // The fixtures carry planted errors; the demo files are clean.
      if (o.name.startsWith('ward-levels')) expect(r.analysis.report.problems.filter((p) => p.severity === 'error'), o.name).toEqual([]);
    }
  });

  it('truncated files', () => {
    const rng = root.stream('truncate');
    for (const o of files) {
      for (let i = 0; i < 40; i++) {
        const cut = 1 + rng.int(o.bytes.length - 1);
        runCase(o, o.bytes.subarray(0, cut), `${o.name} cut at ${cut}`, o.kind === 'csv' && isLineEnd(o.bytes, cut));
      }
    }
  }, 120_000);

  it('one flipped bit, and a few overwritten bytes', () => {
    const rng = root.stream('flip');
    for (const o of files) {
      const n = o.kind === 'xls' ? 150 : 60;
      for (let i = 0; i < n; i++) {
        const b = new Uint8Array(o.bytes);
        const at = rng.int(b.length);
        b[at] ^= 1 << rng.int(8);
        runCase(o, b, `${o.name} bit flip at ${at}`);
      }
      for (let i = 0; i < 15; i++) {
        const b = new Uint8Array(o.bytes);
        const at = rng.int(b.length);
        for (let k = 0; k < 4 && at + k < b.length; k++) b[at + k] = rng.int(256);
        runCase(o, b, `${o.name} 4 bytes overwritten at ${at} (${[...b.subarray(at, at + 4)].join(' ')})`);
      }
    }
  }, 150_000);

  it('hostile text: control characters, huge cells, formulas', () => {
    const rng = root.stream('hostile');
    const base = demoText(40).replace(/^subject,/, 'Patient,').trimEnd().split('\n');
    const hostile = [
      'HX-001\r\nADVICE: give 5000 mg',
      'HX-001\u001b[2J\u001b[31m',
      '\u0000\u0007\u0008',
      '=cmd|\' /C calc\'!A0',
      '=HYPERLINK("http://x","y")',
      '+1+1',
      '@SUM(A1:A9)',
      'x'.repeat(200_000),
      '\u202eevil',
      '__proto__',
    ];
    const pickH = (r: RngStream) => hostile[r.int(hostile.length)];
    const csvCell = (s: string) => (/[",\r\n]/.test(s) ? `"${s.replace(/"/g, '""')}"` : s);
    for (let i = 0; i < 40; i++) {
      const lines = base.map((l) => l.split(','));
      for (let k = 0; k < 3; k++) {
        const row = 1 + rng.int(lines.length - 1);
        const col = rng.int(lines[row].length);
        lines[row][col] = csvCell(pickH(rng));
      }
      const bytes = new TextEncoder().encode(lines.map((l) => l.join(',')).join('\n') + '\n');
      const o: Original = { name: 'hostile.csv', kind: 'csv', bytes };
      runCase(o, bytes, `hostile csv ${i}`);
      // Whatever the cells hold, what reaches a terminal has no raw control characters.
      const r = quiet(() => handleParseMessage({ type: 'parse', id: 'h', fileName: 'hostile.csv', bytes }));
      if (r.type === 'result')
        for (const p of r.analysis.report.problems) expect(printable(`${p.message} [${p.value}]`)).not.toMatch(/[\u0000-\u0008\u000b-\u001f\u007f\u202e\r\n]/);
    }
  }, 60_000);

  it('prints its counts: no crash, no hang, no silent change', () => {
    // eslint-disable-next-line no-console
    console.log(
      [
        `damage fuzz (seed ${SEED}):`,
        `  inputs tried        ${counts.inputs}`,
        `  clear errors        ${counts.clearErrors}`,
        `  unchanged           ${counts.unchanged} (damage in padding, metadata or titles: the same dataset)`,
        `  value edits         ${counts.valueEdits} (values in one row changed in .csv/.xls, which carry no checksum)`,
        `  CSV cut at line end ${counts.cutAtLineEnd} (a shorter whole CSV: undetectable)`,
        `  crashes             ${counts.crashes}`,
        `  hangs               ${counts.hangs}`,
        `  silent changes      ${counts.silentChanges}`,
        ...findings.slice(0, 20).map((f) => `  ${f}`),
      ].join('\n'),
    );
    expect(counts.inputs).toBeGreaterThan(1000);
    expect(findings).toEqual([]);
    expect(counts.crashes).toBe(0);
    expect(counts.hangs).toBe(0);
    expect(counts.silentChanges).toBe(0);
  });
});
