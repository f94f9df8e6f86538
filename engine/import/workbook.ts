/**
 * Spreadsheet bytes -> a neutral sheet model: sheets, rows of cells (raw value, kind, text as
 * shown), detected header row and column type profiles. Nothing from a cell ever becomes a key
 * of a plain object: sheets are an array, header lookups go through Map.
 */
import * as XLSX from 'xlsx';
import { readXlsxEntries, type ZipEntries } from './xlsxFast.js';
import { serialToWallMs } from './values.js';
import { compareWithParsed, walkXls, type XlsWalk } from './xlsCheck.js';
import { lastLineMessage } from '../data/rules.js';
import { decodeText, decodeTextChecked } from './textDecode.js';

export type CellKind = 'number' | 'date' | 'text' | 'boolean' | 'error';

export interface Cell {
  kind: CellKind;
  /** number (for 'date': the Excel serial day number), string, or boolean. */
  raw: number | string | boolean;
  /** The text as the spreadsheet shows it (formatted numbers, dates as displayed). */
  text: string;
}

export interface SheetModel {
  name: string;
  /** rows[r][c]; r, c 0-based from A1 (so the spreadsheet's row number is r + 1). */
  rows: (Cell | undefined)[][];
  /** Number of columns spanned by the sheet (max row length). */
  columnCount: number;
  /** True when the row cap cut the sheet short. */
  truncated: boolean;
}

/** Damage found by comparing what the file declares with what was read: always an error. */
export interface SheetDamage {
  sheet: string;
  /** 1-based row of the first unreadable place, when known. */
  row?: number;
  message: string;
}

export interface WorkbookModel {
  format: 'xlsx' | 'xls' | 'ods' | 'csv' | 'other';
  sheets: SheetModel[];
  /** Damage found while reading (the rows read are then not the whole file). */
  damage?: SheetDamage[];
  /** Workbook uses the 1904 date system (serials then count from 1904-01-01). */
  date1904: boolean;
}

export interface ReadOptions {
  /** Stop reading each sheet after this many rows (fuzzing, previews). Default: no cap. */
  maxRows?: number;
  /** Cells longer than this are cut (and marked) so one giant string cannot stall the parse. */
  maxCellChars?: number;
  /** Already-inflated zip entries (the worker checks and inflates them with zlib first). */
  zipEntries?: ZipEntries;
  /** UTF-8 decoder for the XML inside .xlsx (the worker passes Node's; default a plain-JS one). */
  decodeUtf8?: (bytes: Uint8Array) => string;
  /** Use SheetJS for .xlsx too (the direct reader is the default; tests compare the two). */
  sheetJsOnly?: boolean;
}

/** Thrown for files that are not a readable spreadsheet; the message says what to do. */
export class WorkbookError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'WorkbookError';
  }
}

// The text decoding lives in its own module (no spreadsheet library), so reading a canonical CSV
// does not load SheetJS; re-exported here for the spreadsheet side.
export { decodeText, decodeTextChecked };

function sniffFormat(bytes: Uint8Array): WorkbookModel['format'] {
  if (bytes.length >= 2 && ((bytes[0] === 0xff && bytes[1] === 0xfe) || (bytes[0] === 0xfe && bytes[1] === 0xff))) return 'csv';
  if (bytes.length >= 4 && bytes[0] === 0x50 && bytes[1] === 0x4b) {
    // ODS keeps "mimetypeapplication/vnd.oasis.opendocument" near the start of the zip.
    const head = String.fromCharCode(...bytes.subarray(0, Math.min(bytes.length, 100)));
    return head.includes('opendocument') ? 'ods' : 'xlsx';
  }
  if (bytes.length >= 8 && bytes[0] === 0xd0 && bytes[1] === 0xcf && bytes[2] === 0x11 && bytes[3] === 0xe0) return 'xls';
  let binary = 0;
  const n = Math.min(bytes.length, 4096);
  for (let i = 0; i < n; i++) {
    const b = bytes[i];
    if (b === 0 || (b < 0x09) || (b > 0x0d && b < 0x20 && b !== 0x1b)) binary++;
  }
  if (n > 0 && binary / n > 0.01) return 'other';
  return 'csv';
}

export function columnLetter(col: number): string {
  let s = '';
  let c = col + 1;
  while (c > 0) {
    const m = (c - 1) % 26;
    s = String.fromCharCode(65 + m) + s;
    c = Math.floor((c - 1) / 26);
  }
  return s;
}

export function columnIndex(letter: string): number {
  let n = 0;
  for (const ch of letter.toUpperCase()) {
    const code = ch.charCodeAt(0);
    if (code < 65 || code > 90) return -1;
    n = n * 26 + (code - 64);
  }
  return n - 1;
}

/** Spreadsheet error codes (BIFF / OOXML error values, as SheetJS gives them). */
const ERROR_TEXT = new Map<number, string>([[0x00, '#NULL!'], [0x07, '#DIV/0!'], [0x0f, '#VALUE!'], [0x17, '#REF!'], [0x1d, '#NAME?'], [0x24, '#NUM!'], [0x2a, '#N/A'], [0x2b, '#GETTING_DATA']]);

const p2 = (n: number) => (n < 10 ? `0${n}` : String(n));

/** A date cell's text, written unambiguously (ISO order), from its serial. */
export function serialText(serial: number, date1904: boolean): string {
  const ms = serialToWallMs(serial, date1904);
  if (ms === undefined) return String(serial);
  const d = new Date(ms);
  const sec = d.getUTCSeconds();
  const clock = `${p2(d.getUTCHours())}:${p2(d.getUTCMinutes())}${sec ? `:${p2(sec)}` : ''}`;
  if (serial >= 0 && serial < 1) return clock;
  const day = `${d.getUTCFullYear()}-${p2(d.getUTCMonth() + 1)}-${p2(d.getUTCDate())}`;
  return Math.abs(serial - Math.floor(serial)) > 1e-9 ? `${day} ${clock}` : day;
}

function toCell(c: XLSX.CellObject, maxChars: number, isDateFormat: (fmt: string) => boolean, date1904: boolean): Cell | undefined {
  const t = c.t;
  if (t === 'z' || c.v === undefined || c.v === null) return undefined;
  if (t === 'n') {
    const v = c.v as number;
    if (!Number.isFinite(v)) return { kind: 'error', raw: String(v), text: String(v) };
    if (typeof c.z === 'string' && isDateFormat(c.z)) return { kind: 'date', raw: v, text: serialText(v, date1904) };
    return { kind: 'number', raw: v, text: String(v) };
  }
  if (t === 'd') {
    // cellDates is off, but a format may still hand us a Date: keep the serial, UTC getters.
    const d = c.v as unknown as Date;
    const ms = d.getTime();
    if (!Number.isFinite(ms)) return { kind: 'error', raw: 'invalid date', text: 'invalid date' };
    const serial = ms / 86_400_000 + 25569;
    return { kind: 'date', raw: serial, text: typeof c.w === 'string' ? c.w : d.toISOString() };
  }
  if (t === 'b') return { kind: 'boolean', raw: Boolean(c.v), text: c.v ? 'TRUE' : 'FALSE' };
  if (t === 'e') {
    const text = typeof c.w === 'string' ? c.w : (ERROR_TEXT.get(c.v as number) ?? '#ERROR');
    return { kind: 'error', raw: text, text };
  }
  let s = String(c.v);
  if (s === '') return undefined;
  if (s.length > maxChars) s = s.slice(0, maxChars) + '…';
  return { kind: 'text', raw: s, text: s };
}

/**
 * Read spreadsheet bytes (.xlsx, .xls, .ods, .csv) into the neutral model. Formulas are never
 * evaluated: a formula cell contributes only its cached value (or nothing).
 */
export function readWorkbook(bytes: Uint8Array, options: ReadOptions = {}): WorkbookModel {
  const format = sniffFormat(bytes);
  if (bytes.length === 0) throw new WorkbookError('the file is empty: export the sheet again from the source system');
  if (format === 'other')
    throw new WorkbookError('the file is not a spreadsheet Plateau can read (.xlsx, .xls, .ods or .csv): it looks like binary data of another kind');
  const maxChars = options.maxCellChars ?? 32_767;
  if (format === 'xlsx' && !options.sheetJsOnly) {
    const fast = readXlsxFast(bytes, options, maxChars);
    if (fast) return fast;
  }
  let walk: XlsWalk | undefined;
  if (format === 'xls') {
    // BIFF has no checksums: walk the records first, so damage is named instead of read as data.
    walk = walkXls(bytes);
    if (walk.fatal) throw new WorkbookError(walk.fatal);
  }
  const decoded = format === 'csv' ? decodeTextChecked(bytes) : undefined;
  const text = decoded?.text;
  let wb: XLSX.WorkBook;
  try {
    const input = text ?? bytes;
    wb = XLSX.read(input, {
      type: format === 'csv' ? 'string' : 'array',
      dense: true,
      cellNF: true,
      // Plateau formats what it shows itself; SheetJS's number formatting is a large part of its time.
      cellText: false,
      cellFormula: false,
      cellHTML: false,
      cellStyles: false,
      bookVBA: false,
      // CSV: keep every field as text; Plateau parses numbers, dates and "<2.0" itself.
      raw: format === 'csv',
      sheetRows: options.maxRows !== undefined ? options.maxRows + 1 : 0,
    });
  } catch {
    // The parser's own exception text means nothing to a user ("Cannot set properties of undefined").
    throw new WorkbookError(`the file could not be read as a ${format === 'csv' ? 'text (CSV)' : `.${format}`} spreadsheet: it is damaged, cut short or password-protected; save it again from the spreadsheet program as .xlsx or .csv`);
  }
  const names = Array.isArray(wb.SheetNames) ? wb.SheetNames : [];
  if (names.length === 0) throw new WorkbookError('the workbook has no sheets');
  const sheets: SheetModel[] = [];
  const damage: SheetDamage[] = [];
  const rawData = new Map<string, XLSX.CellObject[][]>();
  const date1904 = Boolean((wb as { Workbook?: { WBProps?: { date1904?: boolean } } }).Workbook?.WBProps?.date1904);
  const formatIsDate = new Map<string, boolean>();
  const isDateFormat = (fmt: string): boolean => {
    let d = formatIsDate.get(fmt);
    if (d === undefined) {
      d = Boolean(XLSX.SSF.is_date(fmt));
      formatIsDate.set(fmt, d);
    }
    return d;
  };
  for (const name of names) {
    const ws = (wb.Sheets as Record<string, XLSX.WorkSheet | undefined>)[name];
    const data = ws ? ((ws as unknown as { '!data'?: XLSX.CellObject[][] })['!data'] ?? []) : [];
    if (ws) rawData.set(String(name), data);
    const rows: (Cell | undefined)[][] = new Array(data.length);
    let columnCount = 0;
    const cap = options.maxRows ?? Infinity;
    const n = Math.min(data.length, cap);
    for (let r = 0; r < n; r++) {
      const src = data[r];
      if (!src) {
        rows[r] = [];
        continue;
      }
      const row: (Cell | undefined)[] = new Array(src.length);
      for (let c = 0; c < src.length; c++) {
        const cell = src[c];
        row[c] = cell ? toCell(cell, maxChars, isDateFormat, date1904) : undefined;
      }
      while (row.length > 0 && row[row.length - 1] === undefined) row.pop();
      if (row.length > columnCount) columnCount = row.length;
      rows[r] = row;
    }
    rows.length = n;
    sheets.push({ name: String(name), rows, columnCount, truncated: data.length > cap });
  }
  if (walk) {
    const cap = options.maxRows ?? Infinity;
    damage.push(...walk.damage);
    damage.push(
      ...compareWithParsed(
        walk,
        names.map((nm) => {
          const data = rawData.get(String(nm));
          return { name: String(nm), sheetExists: data !== undefined, rowsWithCells: (r: number) => r >= cap || Boolean(data?.[r]?.some((c) => c !== undefined && c !== null)) };
        }),
      ),
    );
  }
  if (decoded?.damage && sheets.length > 0) damage.push({ sheet: sheets[0].name, row: decoded.damage.line, message: decoded.damage.message });
  if (text !== undefined && sheets.length > 0) {
    // A text file cut short ends inside a row, without its line break.
    const last = text.charCodeAt(text.length - 1);
    const body = text.replace(/^\uFEFF/, '');
    if (body.trim() !== '' && last !== 10 && last !== 13) {
      const lines = body.split(/\r\n|\r|\n/).length;
      damage.push({ sheet: sheets[0].name, row: lines, message: lastLineMessage(lines) });
    }
  }
  return damage.length ? { format, sheets, date1904, damage } : { format, sheets, date1904 };
}

function readXlsxFast(bytes: Uint8Array, options: ReadOptions, maxCellChars: number): WorkbookModel | undefined {
  try {
    let entries = options.zipEntries;
    if (!entries) {
      const cfb = XLSX.CFB.read(bytes, { type: 'array' });
      entries = (p: string) => {
        const e = XLSX.CFB.find(cfb, `/${p}`);
        const c = e?.content as unknown;
        return c instanceof Uint8Array ? c : Array.isArray(c) ? Uint8Array.from(c as number[]) : undefined;
      };
    }
    const r = readXlsxEntries(entries, { maxRows: options.maxRows, maxCellChars, serialText, decode: options.decodeUtf8 ?? decodeText });
    if (!r) return undefined;
    return r.damage.length ? { format: 'xlsx', sheets: r.sheets, date1904: r.date1904, damage: r.damage } : { format: 'xlsx', sheets: r.sheets, date1904: r.date1904 };
  } catch {
    // Not a package the direct reader understands: SheetJS gets it (and reports what is wrong).
    return undefined;
  }
}

// ---------------------------------------------------------------------------------------------
// Header detection and column profiles

function isTextLabel(cell: Cell | undefined): boolean {
  if (!cell || cell.kind !== 'text') return false;
  const s = cell.text.trim();
  return s.length > 0 && !/^[-+<>]?\s*\d[\d.,\s]*$/.test(s);
}

function filled(row: (Cell | undefined)[] | undefined): number {
  if (!row) return 0;
  let n = 0;
  for (const c of row) if (c && c.text.trim() !== '') n++;
  return n;
}

/**
 * The header row (0-based): the first row among the top 30 whose non-empty cells are all text
 * labels and that has at least two of them and at least 60 % of the widest row's cells, so
 * titles ("Ward 7 export, March") and blank rows above it are skipped.
 */
export function detectHeaderRow(sheet: SheetModel): number {
  const top = Math.min(sheet.rows.length, 30);
  let widest = 0;
  for (let r = 0; r < Math.min(sheet.rows.length, 60); r++) widest = Math.max(widest, filled(sheet.rows[r]));
  for (let r = 0; r < top; r++) {
    const row = sheet.rows[r];
    const n = filled(row);
    if (n < 2 || n < 0.6 * widest) continue;
    let labels = 0;
    for (const c of row) if (isTextLabel(c)) labels++;
    if (labels >= Math.max(2, n - 0)) return r;
    if (labels >= 2 && labels >= 0.8 * n) return r;
  }
  for (let r = 0; r < top; r++) if (filled(sheet.rows[r]) > 0) return r;
  return 0;
}

export type ColumnType = 'number' | 'date' | 'text' | 'time' | 'empty' | 'mixed';

export interface ColumnProfile {
  index: number;
  letter: string;
  header: string;
  type: ColumnType;
  counts: { number: number; date: number; text: number; boolean: number; error: number; empty: number };
  /** Up to five distinct values as shown, for the preview. */
  samples: string[];
}

const NUMERIC_TEXT = /^\s*[-+]?(\d+([.,]\d*)?|[.,]\d+)([eE][-+]?\d+)?\s*$/;
const DATE_TEXT = /^\s*(\d{4}-\d{1,2}-\d{1,2}([T ]\d{1,2}:\d{2}(:\d{2}(\.\d+)?)?Z?)?|\d{1,2}[./-]\d{1,2}[./-]\d{2,4}(\s+\d{1,2}:\d{2}(:\d{2})?(\s*[AaPp][Mm])?)?)\s*$/;
const TIME_TEXT = /^\s*\d{1,2}:\d{2}(:\d{2})?(\s*[AaPp][Mm])?\s*$/;

/** Profile every column below the header row (scans at most `maxRows` data rows). */
export function profileColumns(sheet: SheetModel, headerRow: number, maxRows = 2000): ColumnProfile[] {
  const header = sheet.rows[headerRow] ?? [];
  const width = Math.max(sheet.columnCount, header.length);
  const profiles: ColumnProfile[] = [];
  const end = Math.min(sheet.rows.length, headerRow + 1 + maxRows);
  for (let c = 0; c < width; c++) {
    const counts = { number: 0, date: 0, text: 0, boolean: 0, error: 0, empty: 0 };
    let time = 0;
    const samples: string[] = [];
    const seen = new Set<string>();
    for (let r = headerRow + 1; r < end; r++) {
      const cell = sheet.rows[r]?.[c];
      if (!cell || cell.text.trim() === '') {
        counts.empty++;
        continue;
      }
      if (cell.kind === 'text') {
        if (NUMERIC_TEXT.test(cell.text)) counts.number++;
        else if (DATE_TEXT.test(cell.text)) counts.date++;
        else if (TIME_TEXT.test(cell.text)) time++;
        else counts.text++;
      } else if (cell.kind === 'date') {
        if ((cell.raw as number) < 1 && (cell.raw as number) >= 0) time++;
        else counts.date++;
      } else counts[cell.kind]++;
      if (samples.length < 5 && !seen.has(cell.text)) {
        seen.add(cell.text);
        samples.push(cell.text.length > 40 ? cell.text.slice(0, 40) + '…' : cell.text);
      }
    }
    const nonEmpty = counts.number + counts.date + counts.text + counts.boolean + counts.error + time;
    let type: ColumnType = 'empty';
    if (nonEmpty > 0) {
      const top = Math.max(counts.number, counts.date, counts.text, time);
      if (top < 0.8 * nonEmpty) type = 'mixed';
      else if (top === counts.date) type = 'date';
      else if (top === time) type = 'time';
      else if (top === counts.number) type = 'number';
      else type = 'text';
      // Text columns with a few numbers ("<2.0" levels among numbers) stay "number" when numbers dominate.
      if (type === 'mixed' && counts.number >= 0.5 * nonEmpty) type = 'number';
    }
    const h = header[c];
    profiles.push({ index: c, letter: columnLetter(c), header: h ? h.text.trim() : '', type, counts: { ...counts }, samples });
  }
  return profiles;
}

export interface SheetPreview {
  name: string;
  headerRow: number;
  /** Data rows below the header (blank rows included). */
  dataRowCount: number;
  columns: ColumnProfile[];
  truncated: boolean;
}

export function previewWorkbook(model: WorkbookModel): SheetPreview[] {
  return model.sheets.map((s) => {
    const headerRow = detectHeaderRow(s);
    return {
      name: s.name,
      headerRow: headerRow + 1,
      dataRowCount: Math.max(0, s.rows.length - headerRow - 1),
      columns: profileColumns(s, headerRow),
      truncated: s.truncated,
    };
  });
}
