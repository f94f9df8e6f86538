/**
 * Plateau's canonical long CSV: one event per row, columns found by header name in any order.
 *   subject, time_h, event (dose|level), amount_mg, duration_h, conc_mg_L, censored, lloq_mg_L
 *   optional: route (iv|oral; iv with duration > 0 is an infusion, else a bolus),
 *             ss_interval_h (the dose is the last of a steady-state train at that interval),
 *             grid (1 marks a simulated curve point written by `plateau simulate`; skipped on read)
 *   any other column: a covariate, constant per subject (numeric when every non-empty value is a
 *   number, otherwise text).
 * Text follows RFC 4180 (quoted fields, doubled quotes, CRLF or LF), with an optional BOM.
 */
import { createDataset, type SubjectInput } from './dataset.js';
import { DataError, type CovariateValue, type DataProblem, type Dataset, type Dose, type Observation, type Route } from './types.js';
import { doseKey, duplicateMessage, lastLineMessage, levelBeforeFirstDoseMessage, levelKey, parseCensoredFlag } from './rules.js';

export const CANONICAL_COLUMNS = ['subject', 'time_h', 'event', 'amount_mg', 'duration_h', 'conc_mg_L', 'censored', 'lloq_mg_L'] as const;
export const OPTIONAL_COLUMNS = ['route', 'ss_interval_h', 'grid'] as const;
const REQUIRED_COLUMNS = ['subject', 'time_h', 'event'] as const;

type KnownColumn = (typeof CANONICAL_COLUMNS)[number] | (typeof OPTIONAL_COLUMNS)[number];
const KNOWN_BY_LOWER = new Map<string, KnownColumn>([...CANONICAL_COLUMNS, ...OPTIONAL_COLUMNS].map((c) => [c.toLowerCase(), c]));

/** One CSV record with the 1-based line it starts on. */
export interface CsvRecord {
  line: number;
  fields: string[];
  /** Per field: was it quoted (its text is then kept exactly, spaces included). */
  quoted: boolean[];
}

/**
 * Split RFC 4180 text into records. Blank lines are dropped. Problems (an unclosed quote, text
 * after a closing quote) are pushed to `problems` with their line.
 */
export function parseCsvRecords(text: string, problems: DataProblem[]): CsvRecord[] {
  const records: CsvRecord[] = [];
  const n = text.length;
  let i = text.charCodeAt(0) === 0xfeff ? 1 : 0;
  let line = 1;
  const COMMA = 44, LF = 10, CR = 13, QUOTE = 34;
  while (i < n) {
    const start = line;
    const fields: string[] = [];
    const quoted: boolean[] = [];
    let bad = false;
    for (;;) {
      let field: string;
      let wasQuoted = false;
      if (text.charCodeAt(i) === QUOTE) {
        wasQuoted = true;
        i++;
        field = '';
        for (;;) {
          const q = text.indexOf('"', i);
          if (q < 0) {
            problems.push({ row: start, message: 'a quoted field is never closed (a " is missing); check the quotes on this line' });
            return records;
          }
          const chunk = text.slice(i, q);
          for (let k = chunk.indexOf('\n'); k >= 0; k = chunk.indexOf('\n', k + 1)) line++;
          field += chunk;
          if (text.charCodeAt(q + 1) === QUOTE) {
            field += '"';
            i = q + 2;
          } else {
            i = q + 1;
            break;
          }
        }
        // After a closing quote only a separator or the end of the record may follow.
        let j = i;
        while (j < n) {
          const c = text.charCodeAt(j);
          if (c === COMMA || c === LF || c === CR) break;
          j++;
        }
        const junk = text.slice(i, j);
        if (junk.trim() !== '' && !bad) {
          bad = true;
          problems.push({ row: start, message: `text ${JSON.stringify(junk)} after a closing quote; quote the whole field` });
        }
        i = j;
      } else {
        let j = i;
        while (j < n) {
          const c = text.charCodeAt(j);
          if (c === COMMA || c === LF || c === CR) break;
          j++;
        }
        field = text.slice(i, j);
        i = j;
      }
      fields.push(field);
      quoted.push(wasQuoted);
      if (i >= n) break;
      const c = text.charCodeAt(i);
      if (c === COMMA) {
        i++;
        if (i >= n) {
          // A trailing comma at the very end of the text: one more empty field.
          fields.push('');
          quoted.push(false);
          break;
        }
        continue;
      }
      // End of record: LF, CR LF, or a lone CR.
      i += c === CR && text.charCodeAt(i + 1) === LF ? 2 : 1;
      line++;
      break;
    }
    // Blank lines, and rows of empty cells that spreadsheets pad files with, are not records.
    if (fields.every((f) => f.trim() === '')) continue;
    if (!bad) records.push({ line: start, fields, quoted });
  }
  return records;
}

/** True when the first line of a CSV is Plateau's canonical header (subject, time_h and event columns). */
export function isCanonicalCsv(text: string): boolean {
  const firstLine = text.slice(0, Math.min(text.length, 10_000)).split(/\r\n|\r|\n/)[0] ?? '';
  const records = parseCsvRecords(firstLine + '\n', []);
  const names = new Set((records[0]?.fields ?? []).map((f) => f.trim().toLowerCase()));
  return names.has('subject') && names.has('time_h') && names.has('event');
}

const NUMBER_RE = /^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$/;

/** Parse a number strictly ("1e-3", "-2.5"); undefined when not a plain finite number. */
export function parseStrictNumber(text: string): number | undefined {
  const t = text.trim();
  if (!NUMBER_RE.test(t)) return undefined;
  const x = Number(t);
  return Number.isFinite(x) ? x : undefined;
}

function numberHint(text: string): string {
  const t = text.trim();
  if (/^[+-]?\d+,\d+$/.test(t)) return ' (use a decimal point, not a comma)';
  if (/^[<>]/.test(t)) return ' (for a level below the LLOQ set censored = 1 and give lloq_mg_L)';
  if (/^(nan|inf|-inf|infinity)$/i.test(t)) return ' (leave the cell empty instead)';
  return '';
}

/** Result details beyond the dataset. */
export interface CanonicalCsvParseResult {
  dataset: Dataset;
  /** Rows marked grid = 1 (simulated curve points) that were skipped. */
  skippedGridRows: number;
}

/**
 * Read a canonical CSV. Every bad row is reported with its line number and reason in one
 * DataError; a valid file is built and validated through createDataset.
 */
export function parseCanonicalCsv(text: string): Dataset {
  return parseCanonicalCsvDetailed(text).dataset;
}

export function parseCanonicalCsvDetailed(text: string, encodingDamage?: { line: number; message: string }): CanonicalCsvParseResult {
  // Bytes that were not valid text (found by the caller that decoded them) are damage like any other.
  const problems: DataProblem[] = encodingDamage ? [{ row: encodingDamage.line, message: encodingDamage.message }] : [];
  if (typeof text !== 'string' || text.replace(/^\uFEFF/, '').trim() === '') {
    throw new DataError([{ message: 'the file is empty: expected a header line with subject, time_h, event, ...' }]);
  }
  const records = parseCsvRecords(text, problems);
  if (records.length === 0) throw new DataError(problems.length ? problems : [{ message: 'the file has no header line' }]);
  // Damage: a text file cut short usually ends inside a row, without its line break.
  const lastChar = text.charCodeAt(text.length - 1);
  if (lastChar !== 10 && lastChar !== 13) problems.push({ row: records[records.length - 1].line, message: lastLineMessage(records[records.length - 1].line) });

  const header = records[0];
  const columnOf = new Map<KnownColumn, number>();
  const covariateColumns: { name: string; index: number }[] = [];
  const seenNames = new Map<string, number>();
  header.fields.forEach((raw, index) => {
    const name = raw.trim();
    const lower = name.toLowerCase();
    if (name === '') {
      problems.push({ row: header.line, message: `column ${index + 1} has an empty header; name it or delete the column` });
      return;
    }
    if (seenNames.has(lower)) {
      problems.push({ row: header.line, field: name, message: `column "${name}" appears twice in the header (columns ${seenNames.get(lower)! + 1} and ${index + 1})` });
      return;
    }
    seenNames.set(lower, index);
    const known = KNOWN_BY_LOWER.get(lower);
    if (known) columnOf.set(known, index);
    else covariateColumns.push({ name, index });
  });
  for (const c of REQUIRED_COLUMNS) {
    if (!columnOf.has(c)) problems.push({ row: header.line, field: c, message: `the header has no "${c}" column (needed: ${REQUIRED_COLUMNS.join(', ')})` });
  }
  if (problems.some((p) => p.row === header.line)) throw new DataError(problems);

  const width = header.fields.length;
  const get = (fields: string[], c: KnownColumn): string => {
    const idx = columnOf.get(c);
    return idx === undefined ? '' : (fields[idx] ?? '').trim();
  };

  // Covariates: first pass decides numeric vs text per column.
  const numericColumn = covariateColumns.map(({ index }) =>
    records.slice(1).every((r) => {
      const v = (r.fields[index] ?? '').trim();
      return v === '' || parseStrictNumber(v) !== undefined;
    }),
  );

  interface Building {
    input: SubjectInput;
    /** covariate -> [value, line where first given] */
    covLines: Map<string, { value: CovariateValue; line: number }>;
  }
  const subjects = new Map<string, Building>();
  let skippedGridRows = 0;
  const subjectsWithRowErrors = new Set<string>();

  for (const record of records.slice(1)) {
    const { line, fields } = record;
    if (fields.length !== width) {
      problems.push({ row: line, message: `this row has ${fields.length} field(s) but the header has ${width}; check for a stray or missing comma` });
      continue;
    }
    const at = (field: string, subject?: string): Pick<DataProblem, 'row' | 'field' | 'subject'> =>
      subject ? { row: line, field, subject } : { row: line, field };
    const before = problems.length;

    const gridText = get(fields, 'grid');
    if (gridText !== '') {
      if (gridText === '1' || gridText.toLowerCase() === 'true') {
        skippedGridRows++;
        continue;
      }
      if (!(gridText === '0' || gridText.toLowerCase() === 'false')) problems.push({ ...at('grid'), message: `grid must be 1, 0 or empty, got "${gridText}"` });
    }

    const subject = get(fields, 'subject');
    if (subject === '') problems.push({ ...at('subject'), message: 'subject is empty' });
    const sid = subject || undefined;

    const timeText = get(fields, 'time_h');
    const timeH = parseStrictNumber(timeText);
    if (timeText === '') problems.push({ ...at('time_h', sid), message: 'time_h is empty' });
    else if (timeH === undefined) problems.push({ ...at('time_h', sid), message: `time_h must be a number, got "${timeText}"${numberHint(timeText)}` });
    else if (timeH < 0) problems.push({ ...at('time_h', sid), message: `time_h must be >= 0 (hours from the subject's first event), got ${timeH}` });

    const eventText = get(fields, 'event').toLowerCase();
    const optionalNumber = (c: KnownColumn, rule: 'positive' | 'nonnegative'): number | undefined => {
      const t = get(fields, c);
      if (t === '') return undefined;
      const x = parseStrictNumber(t);
      if (x === undefined) {
        problems.push({ ...at(c, sid), message: `${c} must be a number, got "${t}"${numberHint(t)}` });
        return undefined;
      }
      if (rule === 'positive' && !(x > 0)) problems.push({ ...at(c, sid), message: `${c} must be > 0, got ${x}` });
      if (rule === 'nonnegative' && x < 0) problems.push({ ...at(c, sid), message: `${c} must be >= 0, got ${x}` });
      return x;
    };

    let dose: Dose | undefined;
    let observation: Observation | undefined;
    if (eventText === 'dose') {
      const amountText = get(fields, 'amount_mg');
      const amountMg = optionalNumber('amount_mg', 'positive');
      if (amountText === '') problems.push({ ...at('amount_mg', sid), message: 'a dose row needs amount_mg (> 0)' });
      const durationH = optionalNumber('duration_h', 'nonnegative') ?? 0;
      const routeText = get(fields, 'route').toLowerCase();
      let route: Route = 'bolus';
      if (routeText === '' || routeText === 'iv') route = durationH > 0 ? 'infusion' : 'bolus';
      else if (routeText === 'oral') {
        route = 'oral';
        if (durationH > 0) problems.push({ ...at('duration_h', sid), message: 'an oral dose has no duration; leave duration_h empty or 0' });
      } else problems.push({ ...at('route', sid), message: `route must be iv or oral, got "${get(fields, 'route')}"` });
      const ss = optionalNumber('ss_interval_h', 'positive');
      if (get(fields, 'conc_mg_L') !== '') problems.push({ ...at('conc_mg_L', sid), message: 'a dose row has no level: leave conc_mg_L empty (put the level on its own "level" row)' });
      const cens = parseCensoredFlag(get(fields, 'censored'));
      if (!cens.ok) problems.push({ ...at('censored', sid), message: cens.message });
      else if (cens.value) problems.push({ ...at('censored', sid), message: 'a dose row cannot be censored' });
      if (problems.length === before && timeH !== undefined && amountMg !== undefined) {
        dose = {
          timeH,
          amountMg,
          route,
          durationH: route === 'oral' ? 0 : durationH,
          ...(ss !== undefined ? { steadyStateIntervalH: ss } : {}),
          sourceRow: line,
        };
      }
    } else if (eventText === 'level') {
      const flag = parseCensoredFlag(get(fields, 'censored'));
      const censored = flag.ok && flag.value;
      if (!flag.ok) problems.push({ ...at('censored', sid), message: flag.message });
      const lloq = optionalNumber('lloq_mg_L', 'positive');
      const concText = get(fields, 'conc_mg_L');
      let value: number | undefined;
      if (concText === '') {
        if (!censored) problems.push({ ...at('conc_mg_L', sid), message: 'a level row needs conc_mg_L (or censored = 1 with lloq_mg_L for a level below the LLOQ)' });
      } else {
        value = parseStrictNumber(concText);
        if (value === undefined) problems.push({ ...at('conc_mg_L', sid), message: `conc_mg_L must be a number, got "${concText}"${numberHint(concText)}` });
      }
      if (censored && lloq === undefined && get(fields, 'lloq_mg_L') === '') problems.push({ ...at('lloq_mg_L', sid), message: 'a censored level needs lloq_mg_L (> 0)' });
      const amount = get(fields, 'amount_mg');
      if (amount !== '' && parseStrictNumber(amount) !== 0) problems.push({ ...at('amount_mg', sid), message: 'a level row has no dose: leave amount_mg empty (put the dose on its own "dose" row)' });
      if (problems.length === before && timeH !== undefined) {
        observation = {
          timeH,
          valueMgL: censored ? (lloq as number) : (value as number),
          censored,
          ...(lloq !== undefined ? { lloqMgL: lloq } : {}),
          sourceRow: line,
        };
      }
    } else {
      problems.push({ ...at('event', sid), message: `event must be "dose" or "level", got "${get(fields, 'event')}"` });
    }

    if (!sid) continue;
    if (problems.length > before) subjectsWithRowErrors.add(sid);
    let b = subjects.get(sid);
    if (!b) {
      b = { input: { id: sid, covariates: Object.create(null) as Record<string, CovariateValue>, doses: [], observations: [] }, covLines: new Map() };
      subjects.set(sid, b);
    }
    covariateColumns.forEach(({ name, index }, k) => {
      const t = record.quoted[index] && !numericColumn[k] ? fields[index] : (fields[index] ?? '').trim();
      if (t === '') return;
      const value: CovariateValue = numericColumn[k] ? (parseStrictNumber(t) as number) : t;
      const prev = b!.covLines.get(name);
      if (!prev) {
        b!.covLines.set(name, { value, line });
        b!.input.covariates![name] = value;
      } else if (prev.value !== value) {
        problems.push({
          row: line,
          subject: sid,
          field: name,
          message: `covariate ${name} changes within subject ${sid} (${JSON.stringify(prev.value)} on line ${prev.line}, ${JSON.stringify(value)} here); covariates must be constant per subject`,
        });
      }
    });
    if (dose) b.input.doses.push(dose);
    if (observation) b.input.observations.push(observation);
  }

  // The first-dose rule is only meaningful on a subject whose rows all read (a refused dose row would mislead it).
  for (const b of subjects.values()) problems.push(...timelineProblems(b.input, !subjectsWithRowErrors.has(b.input.id)));
  if (problems.length) throw new DataError(problems.sort((a, b) => (a.row ?? 0) - (b.row ?? 0)));
  if (subjects.size === 0) throw new DataError([{ message: skippedGridRows ? 'the file holds only grid rows (simulated curve points), no data' : 'the file has a header but no data rows' }]);
  const dataset = createDataset([...subjects.values()].map((b) => b.input), covariateColumns.map((c) => c.name));
  return { dataset, skippedGridRows };
}

/** The shared rules on one subject's rows (engine/data/rules.ts): duplicates, levels before the first dose. */
function timelineProblems(s: SubjectInput, checkFirstDose: boolean): DataProblem[] {
  const out: DataProblem[] = [];
  const seen = new Map<string, number | undefined>();
  for (const d of s.doses) {
    const k = doseKey(d.timeH, d.amountMg, d.route, d.durationH);
    if (seen.has(k)) out.push({ row: d.sourceRow, subject: s.id, field: 'time_h', message: duplicateMessage('dose', `line ${seen.get(k)}`) });
    else seen.set(k, d.sourceRow);
  }
  for (const o of s.observations) {
    const k = levelKey(o.timeH, o.valueMgL, o.censored);
    if (seen.has(k)) out.push({ row: o.sourceRow, subject: s.id, field: 'time_h', message: duplicateMessage('level', `line ${seen.get(k)}`) });
    else seen.set(k, o.sourceRow);
  }
  if (!checkFirstDose) return out;
  let first: Dose | undefined;
  for (const d of s.doses) if (!first || d.timeH < first.timeH) first = d;
  for (const o of s.observations) {
    if (first && o.timeH >= first.timeH) continue;
    if (first && o.censored) continue; // a pre-dose level below the LLOQ is consistent with no drug
    out.push({ row: o.sourceRow, subject: s.id, field: 'time_h', message: levelBeforeFirstDoseMessage(s.id, first ? `time_h ${first.timeH}, line ${first.sourceRow}` : undefined) });
  }
  return out;
}

export interface WriteCanonicalCsvOptions {
  /**
   * Per subject id: concentrations (mg/L) to write instead of the observed ones, one per
   * observation in the subject's order. Such rows are written uncensored. NaN writes an empty cell.
   */
  predictions?: ReadonlyMap<string, ArrayLike<number>>;
  /** Per subject id: extra level rows of a prediction curve, written with grid = 1. */
  grid?: ReadonlyMap<string, { timesH: ArrayLike<number>; concMgL: ArrayLike<number> }>;
  /** Line ending; default '\n'. */
  newline?: '\n' | '\r\n';
}

/** Quote a field when RFC 4180 needs it (separator, quote, line break, edge spaces). */
export function csvField(text: string): string {
  if (/[",\r\n]/.test(text) || text !== text.trim()) return `"${text.replace(/"/g, '""')}"`;
  return text;
}

/** Shortest text that reads back to the same double. */
const num = (x: number | undefined): string => (x === undefined || !Number.isFinite(x) ? '' : String(x));

/**
 * Write a dataset as canonical CSV. Reading the text back with parseCanonicalCsv gives the same
 * dataset (numbers are written in their shortest round-trip form).
 */
export function writeCanonicalCsv(dataset: Dataset, options: WriteCanonicalCsvOptions = {}): string {
  const nl = options.newline ?? '\n';
  const hasSs = dataset.subjects.some((s) => s.doses.some((d) => d.steadyStateIntervalH !== undefined));
  const hasGrid = options.grid !== undefined && options.grid.size > 0;
  const header: string[] = [...CANONICAL_COLUMNS, 'route', ...(hasSs ? ['ss_interval_h'] : []), ...(hasGrid ? ['grid'] : [])];
  const covNames = [...dataset.covariateNames];
  for (const c of covNames) {
    if (KNOWN_BY_LOWER.has(c.toLowerCase())) throw new Error(`covariate "${c}" has the name of a canonical CSV column; rename the covariate before writing`);
  }
  const lines: string[] = [[...header, ...covNames].map(csvField).join(',')];

  for (const s of dataset.subjects) {
    const cov = covNames.map((c) => {
      const v = s.covariates[c];
      return v === undefined ? '' : typeof v === 'number' ? num(v) : csvField(v);
    });
    const id = csvField(s.id);
    const preds = options.predictions?.get(s.id);
    const grid = options.grid?.get(s.id);
    type Row = { timeH: number; order: number; cells: string[] };
    const rows: Row[] = [];
    s.doses.forEach((d, k) => {
      const route = d.route === 'oral' ? 'oral' : 'iv';
      const cells = [id, num(d.timeH), 'dose', num(d.amountMg), d.route === 'infusion' ? num(d.durationH) : '', '', '', '', route];
      if (hasSs) cells.push(num(d.steadyStateIntervalH));
      if (hasGrid) cells.push('');
      rows.push({ timeH: d.timeH, order: k, cells });
    });
    s.observations.forEach((o, k) => {
      const predicted = preds !== undefined;
      const value = predicted ? preds[k] : o.valueMgL;
      const cells = [id, num(o.timeH), 'level', '', '', num(value), predicted ? '0' : o.censored ? '1' : '0', num(o.lloqMgL), ''];
      if (hasSs) cells.push('');
      if (hasGrid) cells.push('');
      rows.push({ timeH: o.timeH, order: 1e9 + k, cells });
    });
    if (grid) {
      for (let k = 0; k < grid.timesH.length; k++) {
        const cells = [id, num(grid.timesH[k]), 'level', '', '', num(grid.concMgL[k]), '0', '', ''];
        if (hasSs) cells.push('');
        cells.push('1');
        rows.push({ timeH: grid.timesH[k], order: 2e9 + k, cells });
      }
    }
    rows.sort((a, b) => a.timeH - b.timeH || a.order - b.order);
    for (const r of rows) lines.push([...r.cells, ...cov].join(','));
  }
  return lines.join(nl) + nl;
}
