/**
 * A direct reader of .xlsx sheet XML into the neutral model, several times faster than SheetJS's
 * general parser on large exports (which also builds formats, styles and formulas Plateau never
 * uses). It reads only what the import needs: sheet names and order, shared strings, which cell
 * styles are dates, and cell values (ECMA-376 Part 1, SpreadsheetML; from memory). Anything it
 * does not expect makes it give up (undefined), and readWorkbook falls back to SheetJS.
 */
import * as XLSX from 'xlsx';
import type { Cell, SheetDamage, SheetModel } from './workbook.js';

export type ZipEntries = (path: string) => Uint8Array | undefined;

const ENTITY: Record<string, string> = Object.assign(Object.create(null) as Record<string, string>, { amp: '&', lt: '<', gt: '>', quot: '"', apos: "'" });

/** XML text -> string: entities, numeric character references, and OOXML's _xHHHH_ escapes. */
function unescapeXml(s: string): string {
  if (s.indexOf('&') >= 0)
    s = s.replace(/&(#x[0-9a-fA-F]+|#[0-9]+|[a-z]+);/g, (m, e: string) => {
      if (e[0] === '#') {
        const cp = e[1] === 'x' ? parseInt(e.slice(2), 16) : parseInt(e.slice(1), 10);
        return cp >= 0 && cp <= 0x10ffff ? String.fromCodePoint(cp) : m;
      }
      return ENTITY[e] ?? m;
    });
  if (s.indexOf('_x') >= 0) s = s.replace(/_x([0-9a-fA-F]{4})_/g, (_m, h: string) => String.fromCharCode(parseInt(h, 16)));
  return s;
}

/** The value of attribute `name` (or `prefix:name`) in one start tag. */
function attr(tag: string, name: string): string | undefined {
  let i = 0;
  for (;;) {
    i = tag.indexOf(name, i + 1);
    if (i < 0) return undefined;
    const before = tag.charCodeAt(i - 1);
    if (before !== 32 && before !== 58 && before !== 9 && before !== 10 && before !== 13) continue;
    let j = i + name.length;
    while (tag.charCodeAt(j) === 32) j++;
    if (tag.charCodeAt(j) !== 61) continue;
    j++;
    while (tag.charCodeAt(j) === 32) j++;
    const q = tag.charCodeAt(j);
    if (q !== 34 && q !== 39) continue;
    const end = tag.indexOf(q === 34 ? '"' : "'", j + 1);
    if (end < 0) return undefined;
    const v = tag.slice(j + 1, end);
    return v.indexOf('&') >= 0 || v.indexOf('_x') >= 0 ? unescapeXml(v) : v;
  }
}

/** Concatenated text of every <t> inside `xml`, skipping phonetic runs (<rPh>). */
function textRuns(xml: string): string {
  let out = '';
  let i = 0;
  for (;;) {
    const ph = xml.indexOf('<rPh', i);
    const t = xml.indexOf('<t', i);
    if (t < 0) break;
    if (ph >= 0 && ph < t) {
      const end = xml.indexOf('</rPh>', ph);
      if (end < 0) break;
      i = end + 6;
      continue;
    }
    const c = xml.charCodeAt(t + 2);
    if (c !== 62 && c !== 32 && c !== 47) {
      i = t + 2; // <tx...> or similar: not a text run
      continue;
    }
    const open = xml.indexOf('>', t);
    if (open < 0) break;
    if (xml.charCodeAt(open - 1) === 47) {
      i = open + 1; // <t/>
      continue;
    }
    const close = xml.indexOf('</t>', open);
    if (close < 0) break;
    out += unescapeXml(xml.slice(open + 1, close));
    i = close + 4;
  }
  return out;
}

/** Built-in number formats that are dates or times (ECMA-376 18.8.30; 27-36 and 50-58 are East Asian dates). */
function builtinIsDate(id: number): boolean {
  return (id >= 14 && id <= 22) || (id >= 45 && id <= 47) || (id >= 27 && id <= 36) || (id >= 50 && id <= 58);
}

function resolveTarget(target: string): string {
  if (target.startsWith('/')) return target.slice(1);
  const parts = ['xl'];
  for (const p of target.split('/')) {
    if (p === '..') parts.pop();
    else if (p !== '.' && p !== '') parts.push(p);
  }
  return parts.join('/');
}

function colOf(ref: string): number {
  let n = 0;
  for (let i = 0; i < ref.length; i++) {
    const c = ref.charCodeAt(i);
    if (c >= 65 && c <= 90) n = n * 26 + (c - 64);
    else if (c >= 97 && c <= 122) n = n * 26 + (c - 96);
    else break;
  }
  return n - 1;
}

function rowOf(ref: string): number {
  let i = 0;
  while (i < ref.length && ref.charCodeAt(i) >= 65) i++;
  return parseInt(ref.slice(i), 10) - 1;
}

const ERRORS: ReadonlySet<string> = new Set(['#NULL!', '#DIV/0!', '#VALUE!', '#REF!', '#NAME?', '#NUM!', '#N/A', '#GETTING_DATA']);

export interface FastReadOptions {
  maxRows?: number;
  maxCellChars: number;
  serialText: (serial: number, date1904: boolean) => string;
  decode: (bytes: Uint8Array) => string;
}

export interface FastWorkbook {
  sheets: SheetModel[];
  date1904: boolean;
  /** Places where the file disagrees with itself (a shared-string index past the table, a cut-short sheet). */
  damage: SheetDamage[];
}

/** Read an .xlsx from its zip entries; undefined when the package is not one this reader handles. */
export function readXlsxEntries(entry: ZipEntries, options: FastReadOptions): FastWorkbook | undefined {
  const text = (p: string): string | undefined => {
    const b = entry(p);
    return b ? options.decode(b) : undefined;
  };
  const wbXml = text('xl/workbook.xml');
  const relsXml = text('xl/_rels/workbook.xml.rels');
  if (!wbXml || !relsXml) return undefined;
  const wbPr = /<(?:\w+:)?workbookPr\b[^>]*>/.exec(wbXml);
  const d1904 = wbPr ? attr(wbPr[0], 'date1904') : undefined;
  const date1904 = d1904 === '1' || d1904 === 'true';

  const rels = new Map<string, string>();
  for (const m of relsXml.matchAll(/<(?:\w+:)?Relationship\b[^>]*>/g)) {
    const id = attr(m[0], 'Id');
    const target = attr(m[0], 'Target');
    if (id && target) rels.set(id, resolveTarget(target));
  }

  const shared: string[] = [];
  const damage: SheetDamage[] = [];
  const sstTarget = [...rels.values()].find((t) => /sharedStrings\.xml$/i.test(t)) ?? 'xl/sharedStrings.xml';
  const sstXml = text(sstTarget);
  if (sstXml) {
    let i = 0;
    for (;;) {
      const s = sstXml.indexOf('<si', i);
      if (s < 0) break;
      const e = sstXml.indexOf('</si>', s);
      if (e < 0) {
        const selfClose = sstXml.indexOf('/>', s);
        if (selfClose < 0) break;
        shared.push('');
        i = selfClose + 2;
        continue;
      }
      shared.push(textRuns(sstXml.slice(s, e)));
      i = e + 5;
    }
    const sst = /<(?:\w+:)?sst\b[^>]*>/.exec(sstXml);
    const unique = sst ? attr(sst[0], 'uniqueCount') : undefined;
    if (unique !== undefined && Number(unique) !== shared.length)
      damage.push({ sheet: 'workbook', message: `the shared-string table declares ${unique} strings but holds ${shared.length}: the file is damaged` });
  }

  const xfIsDate: boolean[] = [];
  const stylesTarget = [...rels.values()].find((t) => /styles\.xml$/i.test(t)) ?? 'xl/styles.xml';
  const stylesXml = text(stylesTarget);
  if (stylesXml) {
    const custom = new Map<number, boolean>();
    for (const m of stylesXml.matchAll(/<(?:\w+:)?numFmt\b[^>]*>/g)) {
      const id = Number(attr(m[0], 'numFmtId'));
      const code = attr(m[0], 'formatCode') ?? '';
      if (Number.isInteger(id)) custom.set(id, Boolean(XLSX.SSF.is_date(code)));
    }
    const cellXfs = /<(?:\w+:)?cellXfs\b[^>]*>([\s\S]*?)<\/(?:\w+:)?cellXfs>/.exec(stylesXml);
    if (cellXfs) {
      for (const m of cellXfs[1].matchAll(/<(?:\w+:)?xf\b[^>]*>/g)) {
        const id = Number(attr(m[0], 'numFmtId') ?? '0');
        xfIsDate.push(custom.get(id) ?? builtinIsDate(id));
      }
    }
  }

  const sheets: SheetModel[] = [];
  for (const m of wbXml.matchAll(/<(?:\w+:)?sheet\b[^>]*>/g)) {
    const name = attr(m[0], 'name');
    const rid = /\br:id\s*=\s*"([^"]*)"/.exec(m[0])?.[1] ?? attr(m[0], 'id');
    if (name === undefined || rid === undefined) return undefined;
    const target = rels.get(rid);
    if (!target) return undefined;
    const xml = text(target);
    if (xml === undefined) return undefined;
    const sheet = readSheetXml(xml, name, shared, xfIsDate, date1904, options, (row, message) => damage.push({ sheet: name, row, message }));
    if (!sheet) return undefined;
    sheets.push(sheet);
  }
  if (sheets.length === 0) return undefined;
  return { sheets, date1904, damage: firstPerSheet(damage) };
}

/** The first damaged place per sheet, with how many more there are. */
function firstPerSheet(damage: SheetDamage[]): SheetDamage[] {
  const out = new Map<string, { first: SheetDamage; more: number }>();
  for (const d of damage) {
    const e = out.get(d.sheet);
    if (e) e.more++;
    else out.set(d.sheet, { first: d, more: 0 });
  }
  return [...out.values()].map(({ first, more }) => (more ? { ...first, message: `${first.message} (and ${more} more damaged place(s) in this sheet)` } : first));
}

function readSheetXml(
  xml: string,
  name: string,
  shared: readonly string[],
  xfIsDate: readonly boolean[],
  date1904: boolean,
  o: FastReadOptions,
  onDamage: (row: number | undefined, message: string) => void,
): SheetModel | undefined {
  const start = xml.indexOf('<sheetData');
  if (start < 0) return { name, rows: [], columnCount: 0, truncated: false };
  const end = xml.indexOf('</sheetData>', start);
  if (end < 0 && !/<sheetData[^>]*\/>/.test(xml.slice(start, start + 200))) onDamage(undefined, 'the sheet ends before its data does (cut short): the file is damaged');
  const stop = end < 0 ? xml.length : end;
  const cap = o.maxRows ?? Infinity;
  const rows: (Cell | undefined)[][] = [];
  let columnCount = 0;
  let truncated = false;
  let i = start;
  let rowIndex = -1;
  let current: (Cell | undefined)[] | undefined;
  let col = -1;
  for (;;) {
    const lt = xml.indexOf('<', i + 1);
    if (lt < 0 || lt >= stop) break;
    const c1 = xml.charCodeAt(lt + 1);
    // <row ...>
    if (c1 === 114 && xml.startsWith('<row', lt) && /[\s>/]/.test(xml[lt + 4])) {
      const gt = xml.indexOf('>', lt);
      if (gt < 0) return undefined;
      const tag = xml.slice(lt, gt + 1);
      const r = attr(tag, 'r');
      rowIndex = r !== undefined ? parseInt(r, 10) - 1 : rowIndex + 1;
      if (!(rowIndex >= 0) || rowIndex > 1_048_575) return undefined;
      if (rowIndex >= cap) {
        truncated = true;
        break;
      }
      current = [];
      rows[rowIndex] = current;
      col = -1;
      i = gt;
      continue;
    }
    // <c ...> cell
    if (c1 === 99 && /[\s>/]/.test(xml[lt + 2])) {
      const gt = xml.indexOf('>', lt);
      if (gt < 0 || !current) return undefined;
      const tag = xml.slice(lt, gt + 1);
      const ref = attr(tag, 'r');
      col = ref !== undefined ? colOf(ref) : col + 1;
      if (ref !== undefined && rowOf(ref) !== rowIndex) return undefined;
      if (col < 0 || col > 16_383) return undefined;
      const selfClosing = xml.charCodeAt(gt - 1) === 47;
      let body = '';
      if (!selfClosing) {
        const close = xml.indexOf('</c>', gt);
        if (close < 0) return undefined;
        body = xml.slice(gt + 1, close);
        i = close + 3;
      } else i = gt;
      let cell = readCell(tag, body, shared, xfIsDate, date1904, o);
      if (cell === 'bad-shared-string') {
        onDamage(rowIndex + 1, `the cell ${ref ?? `in column ${col + 1}`} points to shared string ${body.replace(/<[^>]*>/g, '').trim().slice(0, 12)}, but the file holds ${shared.length}: the file is damaged`);
        cell = { kind: 'error', raw: '#DAMAGED', text: '#DAMAGED' };
      }
      if (cell === null) return undefined;
      if (cell) {
        current[col] = cell;
        if (col + 1 > columnCount) columnCount = col + 1;
      }
      continue;
    }
    i = lt;
  }
  for (let r = 0; r < rows.length; r++) if (!rows[r]) rows[r] = [];
  return { name, rows, columnCount, truncated };
}

/** One cell; undefined for an empty cell, null when the cell is not understood. */
function readCell(tag: string, body: string, shared: readonly string[], xfIsDate: readonly boolean[], date1904: boolean, o: FastReadOptions): Cell | undefined | null | 'bad-shared-string' {
  const t = attr(tag, 't') ?? 'n';
  const vStart = body.indexOf('<v');
  let v: string | undefined;
  if (vStart >= 0) {
    const open = body.indexOf('>', vStart);
    if (body.charCodeAt(open - 1) !== 47) {
      const close = body.indexOf('</v>', open);
      if (close < 0) return null;
      v = unescapeXml(body.slice(open + 1, close));
    }
  }
  const cap = (s: string) => (s.length > o.maxCellChars ? s.slice(0, o.maxCellChars) + '…' : s);
  switch (t) {
    case 'n': {
      if (v === undefined || v.trim() === '') return undefined;
      const n = Number(v);
      if (!Number.isFinite(n)) return { kind: 'error', raw: v, text: v };
      const s = attr(tag, 's');
      if (s !== undefined && xfIsDate[Number(s)]) return { kind: 'date', raw: n, text: o.serialText(n, date1904) };
      return { kind: 'number', raw: n, text: String(n) };
    }
    case 's': {
      if (v === undefined) return undefined;
      const k = Number(v);
      if (!(Number.isInteger(k) && k >= 0)) return null;
      if (k >= shared.length) return 'bad-shared-string';
      const str = shared[k];
      return str === '' ? undefined : { kind: 'text', raw: cap(str), text: cap(str) };
    }
    case 'str': {
      if (v === undefined || v === '') return undefined;
      return { kind: 'text', raw: cap(v), text: cap(v) };
    }
    case 'inlineStr': {
      const isStart = body.indexOf('<is');
      const str = isStart >= 0 ? textRuns(body.slice(isStart)) : (v ?? '');
      return str === '' ? undefined : { kind: 'text', raw: cap(str), text: cap(str) };
    }
    case 'b':
      if (v === undefined) return undefined;
      return { kind: 'boolean', raw: v === '1' || v === 'true', text: v === '1' || v === 'true' ? 'TRUE' : 'FALSE' };
    case 'e': {
      const e = v ?? '#ERROR';
      return { kind: 'error', raw: ERRORS.has(e) ? e : '#ERROR', text: ERRORS.has(e) ? e : '#ERROR' };
    }
    case 'd': {
      if (v === undefined) return undefined;
      const ms = Date.parse(/Z|[+-]\d\d:?\d\d$/.test(v) ? v : `${v}Z`);
      if (!Number.isFinite(ms)) return { kind: 'error', raw: v, text: v };
      const serial = ms / 86_400_000 + 25569;
      return { kind: 'date', raw: serial, text: o.serialText(serial, false) };
    }
    default:
      return null;
  }
}
