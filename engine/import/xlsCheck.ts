/**
 * Damage detection for legacy .xls (BIFF8 in a compound file). BIFF carries no checksums, so a
 * damaged or cut-short file can make a parser stop early and return part of a sheet as if it were
 * whole. This walks the record stream on its own and checks what the file declares: every record
 * fits, each substream runs from BOF to EOF, each sheet starts where the workbook says, cell
 * records stay inside the sheet's declared dimensions and in row order, and shared-string indexes
 * are below the declared count. The result is compared with what the parser returned
 * (compareWithParsed). Record layout: [MS-XLS] 2.4 (from memory).
 */
import * as XLSX from 'xlsx';

/** One problem the walk found: the sheet (or "workbook") and the first unreadable place. */
export interface XlsDamage {
  sheet: string;
  /** 1-based spreadsheet row of the first unreadable place, when it is a row. */
  row?: number;
  message: string;
}

export interface XlsWalk {
  /** Fatal: the stream cannot be walked at all (reading it would give part of a file). */
  fatal?: string;
  damage: XlsDamage[];
  /** Per worksheet in workbook order: rows (0-based) that hold at least one value cell. */
  sheets: { name: string; valueRows: Set<number> }[];
}

const BOF = 0x0809;
const EOF = 0x000a;
const BOUNDSHEET = 0x0085;
const SST = 0x00fc;
const DIMENSIONS = 0x0200;
const MAX_RECORD = 8224;
/** Cell records that carry a value, with where their row and column are. */
const VALUE_CELLS: ReadonlySet<number> = new Set([0x0203 /* NUMBER */, 0x027e /* RK */, 0x00fd /* LABELSST */, 0x0204 /* LABEL */, 0x00d6 /* RSTRING */, 0x0205 /* BOOLERR */, 0x0006 /* FORMULA */]);
const MULRK = 0x00bd;
const LABELSST = 0x00fd;
const CELL_LIKE: ReadonlySet<number> = new Set([...VALUE_CELLS, MULRK, 0x0201 /* BLANK */, 0x00be /* MULBLANK */]);
/** Records whose length is fixed by the format: a different length means the record is damaged. */
const FIXED_LENGTH: ReadonlyMap<number, number> = new Map([
  [0x0203, 14], // NUMBER
  [0x027e, 10], // RK
  [0x00fd, 10], // LABELSST
  [0x0205, 8], // BOOLERR
  [0x0201, 6], // BLANK
  [0x0208, 16], // ROW
  [0x0200, 14], // DIMENSIONS
]);

/** Is the record's length the one its content needs? Only records with a checkable layout. */
function lengthFits(type: number, len: number, s: Uint8Array, d: number): boolean {
  const fixed = FIXED_LENGTH.get(type);
  if (fixed !== undefined) return len === fixed;
  if (type === MULRK) return len >= 12 && (len - 6) % 6 === 0;
  if (type === 0x00be) return len >= 8 && len % 2 === 0; // MULBLANK
  if (type === 0x0204) {
    // LABEL: row, column, format, then a string of cch characters (1 or 2 bytes each).
    if (len < 9) return false;
    const cch = s[d + 6] | (s[d + 7] << 8);
    return len === 9 + cch * (s[d + 8] & 1 ? 2 : 1);
  }
  return true;
}

/** The Workbook stream of a compound file, or a reason it cannot be had. */
function workbookStream(bytes: Uint8Array): { stream: Uint8Array } | { fatal: string } {
  let cfb: ReturnType<typeof XLSX.CFB.read>;
  try {
    cfb = XLSX.CFB.read(bytes, { type: 'array' });
  } catch {
    return { fatal: 'the .xls container (compound file) is damaged or cut short: its directory cannot be read' };
  }
  const entry = XLSX.CFB.find(cfb, 'Workbook') ?? XLSX.CFB.find(cfb, 'Book');
  if (!entry) return { fatal: 'the .xls container holds no workbook stream: the file is damaged, cut short or not an Excel workbook' };
  const c = entry.content as unknown;
  const stream = c instanceof Uint8Array ? c : Array.isArray(c) ? Uint8Array.from(c as number[]) : undefined;
  if (!stream) return { fatal: 'the workbook stream of the .xls file cannot be read: the file is damaged or cut short' };
  const declared = (entry as { size?: number }).size;
  if (typeof declared === 'number' && stream.length < declared)
    return { fatal: `the workbook stream is cut short (${stream.length} of ${declared} bytes): the file was truncated; save it again from the spreadsheet program` };
  return { stream };
}

/** Walk the BIFF8 record stream of an .xls file. */
export function walkXls(bytes: Uint8Array): XlsWalk {
  const got = workbookStream(bytes);
  if ('fatal' in got) return { fatal: got.fatal, damage: [], sheets: [] };
  const s = got.stream;
  const n = s.length;
  const u16 = (o: number) => s[o] | (s[o + 1] << 8);
  const u32 = (o: number) => (s[o] | (s[o + 1] << 8) | (s[o + 2] << 16) | (s[o + 3] << 24)) >>> 0;
  const damage: XlsDamage[] = [];
  const fatal = (msg: string): XlsWalk => ({ fatal: msg, damage, sheets: [] });

  // Globals: BOF ... BOUNDSHEET ... SST ... EOF.
  if (n < 8 || u16(0) !== BOF) return fatal('the workbook stream does not start with a BOF record: the file is damaged or not a BIFF8 (.xls) workbook');
  const bounds: { name: string; offset: number; type: number }[] = [];
  let uniqueStrings = -1;
  let p = 0;
  let globalsEnd = -1;
  while (p + 4 <= n) {
    const type = u16(p);
    const len = u16(p + 2);
    if (len > MAX_RECORD || p + 4 + len > n) return fatal(`workbook globals: the record at byte ${p} runs past the end of the stream: the file is damaged or cut short`);
    if (type === BOUNDSHEET && len >= 8) {
      const cch = s[p + 4 + 6];
      const flags = s[p + 4 + 7];
      let name = '';
      for (let k = 0; k < cch; k++) {
        const o = p + 4 + 8 + (flags & 1 ? 2 * k : k);
        if (o + (flags & 1 ? 1 : 0) >= p + 4 + len) break;
        name += String.fromCharCode(flags & 1 ? u16(o) : s[o]);
      }
      bounds.push({ name, offset: u32(p + 4), type: s[p + 4 + 5] });
    } else if (type === SST && len >= 8) uniqueStrings = u32(p + 8);
    p += 4 + len;
    if (type === EOF) {
      globalsEnd = p;
      break;
    }
  }
  if (globalsEnd < 0) return fatal('the workbook globals never end (no EOF record): the file is damaged or cut short');
  if (bounds.length === 0) return fatal('the workbook lists no sheets: the file is damaged');

  const sheets: XlsWalk['sheets'] = [];
  let lastEnd = globalsEnd;
  for (const b of bounds) {
    const where = `sheet "${b.name}"`;
    if (b.offset + 4 > n || u16(b.offset) !== BOF) return fatal(`${where}: the workbook says it starts at byte ${b.offset}, but no sheet starts there: the file is damaged or cut short`);
    const valueRows = new Set<number>();
    let dims: { r0: number; r1: number; c0: number; c1: number } | undefined;
    let lastRow = -1;
    let lastCol = -1;
    let ended = false;
    let q = b.offset;
    let depth = 0;
    while (q + 4 <= n) {
      const type = u16(q);
      const len = u16(q + 2);
      if (len > MAX_RECORD || q + 4 + len > n)
        return fatal(`${where}: the record at byte ${q}${lastRow >= 0 ? ` (after row ${lastRow + 1})` : ''} runs past the end of the stream: the file is damaged or cut short`);
      const d = q + 4;
      if (depth === 1 && !lengthFits(type, len, s, d))
        return fatal(`${where}: the record at byte ${q}${lastRow >= 0 ? ` (after row ${lastRow + 1})` : ''} has the wrong length for its kind: the file is damaged; save it again from the spreadsheet program`);
      if (type === BOF) depth++;
      else if (type === EOF) {
        depth--;
        if (depth === 0) {
          q = d + len;
          ended = true;
          break;
        }
      } else if (depth === 1 && type === DIMENSIONS && len >= 12) dims = { r0: u32(d), r1: u32(d + 4), c0: u16(d + 8), c1: u16(d + 10) };
      else if (depth === 1 && CELL_LIKE.has(type) && len >= 4) {
        const row = u16(d);
        const col = u16(d + 2);
        const colLast = type === MULRK || type === 0x00be ? u16(d + len - 2) : col;
        const place = `row ${row + 1}, column ${col + 1}`;
        if (dims && (row < dims.r0 || row >= dims.r1 || col < dims.c0 || colLast >= dims.c1))
          damage.push({ sheet: b.name, row: row + 1, message: `a cell at ${place} lies outside the sheet's declared size (rows ${dims.r0 + 1}-${dims.r1}, columns ${dims.c0 + 1}-${dims.c1}): the file is damaged` });
        else if (row < lastRow || (row === lastRow && col <= lastCol))
          damage.push({ sheet: b.name, row: row + 1, message: `the cell at ${place} is out of order (after row ${lastRow + 1}, column ${lastCol + 1}): the file is damaged` });
        if (colLast < col) damage.push({ sheet: b.name, row: row + 1, message: `a multi-cell record at ${place} is damaged` });
        lastRow = row;
        lastCol = colLast;
        if (type === LABELSST && len >= 10 && uniqueStrings >= 0 && u32(d + 6) >= uniqueStrings)
          damage.push({ sheet: b.name, row: row + 1, message: `the cell at ${place} points to shared string ${u32(d + 6)}, but the file holds ${uniqueStrings}: the file is damaged` });
        if (VALUE_CELLS.has(type) || type === MULRK) valueRows.add(row);
      }
      q = d + len;
    }
    if (dims && lastRow >= 0 && dims.r1 > lastRow + 1)
      damage.push({ sheet: b.name, row: lastRow + 2, message: `the sheet declares rows up to ${dims.r1}, but its cells end at row ${lastRow + 1}: rows are missing, the file is damaged` });
    if (!ended) return fatal(`${where} never ends (no EOF record${lastRow >= 0 ? ` after row ${lastRow + 1}` : ''}): the file is damaged or cut short`);
    if (b.type === 0) sheets.push({ name: b.name, valueRows });
    if (q > lastEnd) lastEnd = q;
  }
  // Past the last sheet only padding may follow.
  for (let k = lastEnd; k < n; k++)
    if (s[k] !== 0) {
      damage.push({ sheet: 'workbook', message: `unexpected data after the last sheet (byte ${k}): the file is damaged` });
      break;
    }
  return { damage: dedupe(damage), sheets };
}

/** At most one message per sheet and kind: the first unreadable place, and how many more. */
function dedupe(damage: XlsDamage[]): XlsDamage[] {
  const bySheet = new Map<string, XlsDamage[]>();
  for (const d of damage) {
    const list = bySheet.get(d.sheet) ?? [];
    list.push(d);
    bySheet.set(d.sheet, list);
  }
  const out: XlsDamage[] = [];
  for (const list of bySheet.values()) {
    const first = list[0];
    out.push(list.length > 1 ? { ...first, message: `${first.message} (and ${list.length - 1} more damaged place(s) in this sheet)` } : first);
  }
  return out;
}

/**
 * Compare the walk with the rows the parser returned for each sheet: a row the file holds but
 * the parser lost is damage, named with the sheet and the first such row.
 */
export function compareWithParsed(walk: XlsWalk, parsed: { name: string; rowsWithCells: (r: number) => boolean; sheetExists: boolean }[]): XlsDamage[] {
  const out: XlsDamage[] = [];
  for (const ws of walk.sheets) {
    const p = parsed.find((x) => x.name === ws.name);
    if (!p || !p.sheetExists) {
      out.push({ sheet: ws.name, message: `the sheet holds ${ws.valueRows.size} row(s) with values but could not be read: the file is damaged` });
      continue;
    }
    const lost = [...ws.valueRows].filter((r) => !p.rowsWithCells(r)).sort((a, b) => a - b);
    if (lost.length > 0)
      out.push({ sheet: ws.name, row: lost[0] + 1, message: `${lost.length} of ${ws.valueRows.size} rows with values could not be read, the first at row ${lost[0] + 1}: the file is damaged; save it again from the spreadsheet program` });
  }
  return out;
}
