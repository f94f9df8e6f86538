/**
 * Cell values -> numbers, wall-clock times, units, censoring and exclusion comments.
 *
 * Times are "wall clock as written": a date-time is turned into milliseconds on a UTC time line
 * (Date.UTC of the written fields) with no time zone applied, so two times differ by exactly
 * what their written fields differ by. Clock changes (daylight saving) are not corrected, since
 * the files carry no UTC offset; build.ts warns when an interval spans one (see clockChangesBetween).
 */
import type { Cell } from './workbook.js';
import defaults from '../../resources/import/importDefaults.json' with { type: 'json' };
import molar from '../../resources/import/molarMasses.json' with { type: 'json' };

export type Parsed<T> = { ok: true; value: T } | { ok: false; message: string };
const fail = <T>(message: string): Parsed<T> => ({ ok: false, message });
const ok = <T>(value: T): Parsed<T> => ({ ok: true, value });

export type DecimalSeparator = 'dot' | 'comma' | 'auto';

/** Plain text of a cell, trimmed, with non-breaking and thin spaces as spaces. */
const ODD_SPACES = /[\u00a0\u2009\u202f]/g;
const ODD_SPACE = /[\u00a0\u2009\u202f]/;

export function cellText(cell: Cell | undefined): string {
  if (!cell) return '';
  const t = cell.text;
  if (cell.kind !== 'text' || t.length === 0) return t;
  // Fast path: most cells have nothing to trim or replace.
  if (t.charCodeAt(0) > 32 && t.charCodeAt(t.length - 1) > 32 && !ODD_SPACE.test(t)) return t;
  return t.replace(ODD_SPACES, ' ').trim();
}

export function isBlank(cell: Cell | undefined): boolean {
  return cellText(cell) === '';
}

const NUM_DOT = /^[-+]?(\d+(\.\d*)?|\.\d+)([eE][-+]?\d+)?$/;
const NUM_COMMA = /^[-+]?(\d+(,\d*)?|,\d+)$/;
const GROUPED_DOT = /^[-+]?\d{1,3}(,\d{3})+(\.\d+)?$/;
const GROUPED_COMMA = /^[-+]?\d{1,3}(\.\d{3})+(,\d+)?$/;

/** A number from text as written in a lab export ("12.5", "12,5", "1 250", "1.250,5"). */
export function parseNumberText(text: string, sep: DecimalSeparator = 'auto'): Parsed<number> {
  const s = text.replace(/\s+/g, '');
  if (s === '') return fail('the cell is empty');
  if (NUM_DOT.test(s) && (sep !== 'comma' || !s.includes('.'))) return ok(Number(s));
  if (sep === 'comma' && NUM_COMMA.test(s)) return ok(Number(s.replace(',', '.')));
  if (sep === 'comma' && GROUPED_COMMA.test(s)) return ok(Number(s.replace(/\./g, '').replace(',', '.')));
  if (sep === 'dot' && GROUPED_DOT.test(s)) return ok(Number(s.replace(/,/g, '')));
  if (sep === 'comma' && NUM_DOT.test(s)) {
    // "12.5" in a decimal-comma file: a dot with exactly three digits after it is a thousands mark.
    if (/^[-+]?\d{1,3}\.\d{3}$/.test(s)) return ok(Number(s.replace('.', '')));
    return ok(Number(s));
  }
  if (sep === 'auto') {
    if (NUM_COMMA.test(s)) {
      if (/^[-+]?\d{1,3},\d{3}$/.test(s))
        return fail(`"${text}" could be ${s.replace(',', '.')} (decimal comma) or ${s.replace(',', '')} (thousands separator): give --decimal-comma if the file writes decimals with a comma`);
      return ok(Number(s.replace(',', '.')));
    }
    if (/^[-+]?\d{1,3}(\.\d{3})+,\d+$/.test(s)) return ok(Number(s.replace(/\./g, '').replace(',', '.')));
    if (/^[-+]?\d{1,3}(,\d{3})+\.\d+$/.test(s)) return ok(Number(s.replace(/,/g, '')));
  }
  return fail(`"${text.length > 60 ? text.slice(0, 60) + '…' : text}" is not a number`);
}

/** A number from a cell: numeric cells as they are, text parsed with the decimal separator. */
export function parseNumberCell(cell: Cell | undefined, sep: DecimalSeparator = 'auto'): Parsed<number> {
  if (!cell) return fail('the cell is empty');
  if (cell.kind === 'number') return ok(cell.raw as number);
  if (cell.kind === 'text') return parseNumberText(cell.raw as string, sep);
  if (cell.kind === 'date') return fail(`"${cell.text}" is a date, not a number`);
  if (cell.kind === 'error') return fail(`the cell holds the spreadsheet error ${cell.text}`);
  return fail(`"${cell.text}" is not a number`);
}

// ---------------------------------------------------------------------------------------------
// Levels: values, censoring, exclusion comments

export type LevelValue =
  | { kind: 'value'; value: number }
  /** Below the limit; `limit` is in the level's unit when the cell states it ("<2.0"). */
  | { kind: 'censored'; limit?: number; text: string };

const CENSOR_WORDS = /^(<\s*)?(lloq|loq|llq|lod|blq|bql|bloq|bld|nd|n\.d\.?|not detected|non detecte|nicht nachweisbar|n\.n\.?|nn|undetectable|below (the )?(limit|lloq|loq|limit of quantification|detection limit)|negative|neg)$/i;

export function parseLevelCell(cell: Cell | undefined, sep: DecimalSeparator): Parsed<LevelValue> {
  if (!cell) return fail('the level is empty');
  if (cell.kind === 'number') return ok({ kind: 'value', value: cell.raw as number });
  const text = cellText(cell);
  if (cell.kind !== 'text') return fail(`"${cell.text}" is not a level`);
  const m = /^(<=|=<|<|&lt;|≤)\s*(.+)$/.exec(text);
  if (m) {
    const n = parseNumberText(m[2], sep);
    if (n.ok) return ok({ kind: 'censored', limit: n.value, text });
  }
  if (CENSOR_WORDS.test(text)) return ok({ kind: 'censored', text });
  if (/^(>|≥|>=)\s*/.test(text))
    return fail(`"${text}" is above the assay's upper limit: Plateau has no right-censored levels; ask the laboratory for the diluted result or exclude the row`);
  const n = parseNumberText(text, sep);
  if (n.ok) return ok({ kind: 'value', value: n.value });
  return fail(`${n.message} (expected a level such as 12.4, "<2.0" or BLQ)`);
}

/** Fold case and accents so "Hämolysiert" matches "hamolysiert". */
export function foldText(s: string): string {
  return s.normalize('NFD').replace(/[\u0300-\u036f]/g, '').toLowerCase();
}

export const DEFAULT_EXCLUDE_WORDS: readonly string[] = defaults.excludeCommentWords;

function escapeRe(s: string): string {
  return s.replace(/[.*+?^${}()|[\]\\]/g, '\\$&');
}

export interface CommentMatcher {
  (comment: string): string | undefined;
}

/**
 * A matcher returning the exclusion word found in a sample comment (whole words, accents and
 * case folded), or undefined. "not haemolysed" / "no clot" do not exclude.
 */
export function buildCommentMatcher(words: readonly string[]): CommentMatcher {
  const list = [...new Set(words.map((w) => foldText(w).trim()).filter((w) => w.length > 0))].sort((a, b) => b.length - a.length);
  if (list.length === 0) return () => undefined;
  const re = new RegExp(`(^|[^\\p{L}\\p{N}])(${list.map(escapeRe).join('|')})(?=$|[^\\p{L}\\p{N}])`, 'u');
  const neg = /(^|[^\p{L}])(not|no|non|kein|keine|nicht|pas|geen)\s+$/u;
  return (comment: string) => {
    if (comment.length === 0) return undefined;
    const folded = foldText(comment.length > 2000 ? comment.slice(0, 2000) : comment);
    const m = re.exec(folded);
    if (!m) return undefined;
    const before = folded.slice(0, m.index + m[1].length);
    if (neg.test(before)) return undefined;
    return m[2];
  };
}

// ---------------------------------------------------------------------------------------------
// Units

/** Canonical spelling of a unit: lower case, micro as "u", no spaces, "mcg" -> "ug". */
const unitCache = new Map<string, string>();

export function normaliseUnit(text: string): string {
  const hit = unitCache.get(text);
  if (hit !== undefined) return hit;
  const u = normaliseUnitUncached(text);
  if (unitCache.size < 2000) unitCache.set(text, u);
  return u;
}

function normaliseUnitUncached(text: string): string {
  return text
    .trim()
    .replace(/[µμ]/g, 'u')
    .toLowerCase()
    .replace(/\s+/g, '')
    .replace(/^mcg/, 'ug')
    .replace(/^mc(?=g|mol)/, 'u')
    .replace(/ℓ/g, 'l')
    .replace(/per/g, '/');
}

/**
 * Factors to mg/L. 1 ug/mL = 1 mg/L and 1 ng/mL = 1 ug/L = 0.001 mg/L (SI prefixes); a molar
 * level c umol/L of a drug of molar mass M g/mol is c * M ug/L = c * M / 1000 mg/L.
 */
const LEVEL_FACTORS: ReadonlyMap<string, number> = new Map([
  ['mg/l', 1],
  ['ug/ml', 1],
  ['g/l', 1000],
  ['mg/dl', 10],
  ['ug/dl', 0.01],
  ['ug/l', 1e-3],
  ['ng/ml', 1e-3],
  ['ng/l', 1e-6],
  ['pg/ml', 1e-6],
]);
const MOLAR_FACTORS: ReadonlyMap<string, number> = new Map([
  ['mol/l', 1e3],
  ['mmol/l', 1],
  ['umol/l', 1e-3],
  ['nmol/l', 1e-6],
]);

export const KNOWN_LEVEL_UNITS = [...LEVEL_FACTORS.keys(), ...MOLAR_FACTORS.keys()];

/** Factor f so that value [unit] * f = value [mg/L]. Molar units need the molar mass (g/mol). */
export function levelFactorToMgL(unit: string, molarMassGPerMol?: number): Parsed<number> {
  const u = normaliseUnit(unit);
  if (u === '') return fail('the level unit is missing: write it in the column header, e.g. "Level (mg/L)", or add a unit column');
  const f = LEVEL_FACTORS.get(u);
  if (f !== undefined) return ok(f);
  const fm = MOLAR_FACTORS.get(u);
  if (fm !== undefined) {
    if (!(molarMassGPerMol !== undefined && molarMassGPerMol > 0))
      return fail(`the level unit ${unit} is molar: give the drug's molar mass (g/mol) in the mapping (molarMassGPerMol) or with --molar-mass`);
    return ok(fm * molarMassGPerMol);
  }
  return fail(`unknown level unit "${unit}" (known: mg/L, ug/mL, ug/L, ng/mL, mg/dL, g/L, mmol/L, umol/L, nmol/L)`);
}

const DOSE_FACTORS: ReadonlyMap<string, number> = new Map([
  ['mg', 1],
  ['g', 1000],
  ['gram', 1000],
  ['grams', 1000],
  ['ug', 1e-3],
  ['milligram', 1],
  ['milligrams', 1],
]);

export function doseFactorToMg(unit: string): Parsed<number> {
  const u = normaliseUnit(unit);
  if (u === '') return fail('the dose unit is missing: write it in the column header, e.g. "Dose (mg)", or add a unit column');
  const f = DOSE_FACTORS.get(u);
  if (f !== undefined) return ok(f);
  if (/\/kg$/.test(u)) return fail(`dose unit "${unit}" is per kilogram: export the absolute dose (mg) instead`);
  return fail(`unknown dose unit "${unit}" (known: mg, g, ug)`);
}

/** Molar mass of creatinine, PubChem CID 588: 113.12 g/mol (from memory). */
export const CREATININE_MOLAR_MASS_G_PER_MOL = 113.12;
/**
 * umol/L per mg/dL of creatinine: 1 mg/dL = 10 mg/L = 10 / 113.12 mmol/L = 88.4 umol/L
 * (the factor used by clinical laboratories; KDIGO 2012 CKD guideline lists 88.4, from memory).
 */
export const CREATININE_UMOL_L_PER_MG_DL = 88.4;

export function creatinineFactorToUmolL(unit: string): Parsed<number> {
  const u = normaliseUnit(unit);
  if (u === '') return fail('the creatinine unit is missing: write it in the column header, e.g. "Creatinine (umol/L)" or "(mg/dL)", or add a unit column');
  if (u === 'umol/l') return ok(1);
  if (u === 'mmol/l') return ok(1000);
  if (u === 'mg/dl') return ok(CREATININE_UMOL_L_PER_MG_DL);
  if (u === 'mg/l') return ok(CREATININE_UMOL_L_PER_MG_DL / 10);
  return fail(`unknown creatinine unit "${unit}" (known: umol/L, mmol/L, mg/dL, mg/L)`);
}

export function weightFactorToKg(unit: string): Parsed<number> {
  const u = normaliseUnit(unit);
  if (u === '' || u === 'kg') return ok(1);
  if (u === 'g') return ok(1e-3);
  if (u === 'lb' || u === 'lbs') return ok(0.45359237); // international avoirdupois pound, exact by definition
  return fail(`unknown weight unit "${unit}" (known: kg, g, lb)`);
}

export function heightFactorToCm(unit: string): Parsed<number> {
  const u = normaliseUnit(unit);
  if (u === '' || u === 'cm') return ok(1);
  if (u === 'm') return ok(100);
  if (u === 'mm') return ok(0.1);
  if (u === 'in' || u === 'inch') return ok(2.54); // international inch, exact by definition
  return fail(`unknown height unit "${unit}" (known: cm, m, mm, in)`);
}

export function durationFactorToH(unit: string): Parsed<number> {
  const u = normaliseUnit(unit);
  if (u === '' || u === 'h' || u === 'hr' || u === 'hrs' || u === 'hour' || u === 'hours' || u === 'std') return ok(1);
  if (u === 'min' || u === 'mins' || u === 'minutes' || u === 'minute') return ok(1 / 60);
  return fail(`unknown duration unit "${unit}" (known: h, min)`);
}

export function rateFactorToMgPerH(unit: string): Parsed<number> {
  const u = normaliseUnit(unit);
  if (u === '' || u === 'mg/h' || u === 'mg/hr') return ok(1);
  if (u === 'mg/min') return ok(60);
  if (u === 'g/h') return ok(1000);
  if (u === 'ml/h') return fail('an infusion rate in mL/h needs the concentration: export the duration or the amount in mg/h');
  return fail(`unknown infusion rate unit "${unit}" (known: mg/h, mg/min, g/h)`);
}

export interface MolarMassEntry {
  name: string;
  aliases: string[];
  molarMassGPerMol: number;
  note: string;
}
export const MOLAR_MASSES: readonly MolarMassEntry[] = molar.substances;

/** Molar mass (g/mol) of a drug by name or alias, from resources/import/molarMasses.json. */
export function lookupMolarMass(drug: string): number | undefined {
  const d = foldText(drug).trim();
  for (const e of MOLAR_MASSES) if (e.name === d || e.aliases.includes(d)) return e.molarMassGPerMol;
  return undefined;
}

// ---------------------------------------------------------------------------------------------
// Dates and times

export type DateOrder = 'dayFirst' | 'monthFirst' | 'auto';

/** A date-time as written: ms on a zone-free time line; `hasTime` when a time of day was given. */
export interface WallTime {
  ms: number;
  hasTime: boolean;
  /** For text d/m/y dates under 'auto': which orders the value allows. */
  order?: 'either' | 'dayFirstOnly' | 'monthFirstOnly' | 'same';
}

const MS_H = 3_600_000;
const MS_DAY = 86_400_000;

/**
 * Excel serial day -> wall ms, with no time zone (ECMA-376 Part 1 18.17.4: the 1900 system counts
 * the non-existent 1900-02-29 as serial 60, so serials below 61 are one day ahead; the 1904
 * system starts 1,462 days later; from memory). Rounded to the second, as spreadsheets show.
 */
export function serialToWallMs(serial: number, date1904 = false): number | undefined {
  if (!Number.isFinite(serial) || serial < 0 || serial > 2_958_465) return undefined;
  let s = date1904 ? serial + 1462 : serial;
  if (s < 61) s += 1; // before 1900-03-01; serial 60 (the fake 29 February) reads as 1 March
  return Math.round((s - 25569) * 86_400) * 1000;
}

function validYmd(y: number, m: number, d: number): boolean {
  if (m < 1 || m > 12 || d < 1 || d > 31) return false;
  const t = new Date(Date.UTC(y, m - 1, d));
  return t.getUTCDate() === d && t.getUTCMonth() === m - 1;
}

function parseClock(h: string, mi: string, s: string | undefined, ampm: string | undefined): number | undefined {
  let hh = Number(h);
  const mm = Number(mi);
  const ss = s ? Number(s) : 0;
  if (ampm) {
    if (hh < 1 || hh > 12) return undefined;
    const pm = /p/i.test(ampm);
    if (hh === 12) hh = pm ? 12 : 0;
    else if (pm) hh += 12;
  }
  if (hh > 24 || mm > 59 || ss >= 60 || (hh === 24 && (mm > 0 || ss > 0))) return undefined;
  return ((hh * 60 + mm) * 60 + ss) * 1000;
}

const ISO_RE = /^(\d{4})-(\d{1,2})-(\d{1,2})(?:[T ](\d{1,2}):(\d{2})(?::(\d{2})(?:\.\d+)?)?(Z|[+-]\d{2}:?\d{2})?)?$/;
const DMY_RE = /^(\d{1,2})[./-](\d{1,2})[./-](\d{2}|\d{4})(?:[ T,]+(\d{1,2})[:.h](\d{2})(?::(\d{2}))?\s*([AaPp]\.?[Mm]\.?)?)?$/;

/** A date or date-time from a cell. Text dates follow `order`; 'auto' returns which orders fit. */
export function parseDateCell(cell: Cell | undefined, order: DateOrder, date1904 = false): Parsed<WallTime> {
  if (!cell) return fail('the date is empty');
  if (cell.kind === 'date' || cell.kind === 'number') {
    const serial = cell.raw as number;
    if (cell.kind === 'date' && serial >= 0 && serial < 1) return fail(`${cell.text} is a time of day without a date: put the date in this column (or map a separate time column)`);
    if (cell.kind === 'number' && (serial < 1 || serial > 2_958_465))
      return fail(`${cell.text} is a number, not a date (expected a date cell or a text date such as 2024-03-31 14:30)`);
    const ms = serialToWallMs(serial, date1904);
    if (ms === undefined) return fail(`${cell.text} is not a valid spreadsheet date`);
    return ok({ ms, hasTime: Math.abs(serial - Math.floor(serial)) > 1e-9 });
  }
  if (cell.kind !== 'text') return fail(`"${cell.text}" is not a date`);
  const text = cellText(cell);
  let m = ISO_RE.exec(text);
  if (m) {
    const y = Number(m[1]);
    const mo = Number(m[2]);
    const d = Number(m[3]);
    if (!validYmd(y, mo, d)) return fail(`"${text}" is not a valid date`);
    if (m[7]) return fail(`"${text}" carries a UTC offset; Plateau takes times as written on the ward clock: export local times without an offset`);
    const clock = m[4] !== undefined ? parseClock(m[4], m[5], m[6], undefined) : 0;
    if (clock === undefined) return fail(`"${text}" has an invalid time of day`);
    return ok({ ms: Date.UTC(y, mo - 1, d) + clock, hasTime: m[4] !== undefined, order: 'same' });
  }
  m = DMY_RE.exec(text);
  if (m) {
    const a = Number(m[1]);
    const b = Number(m[2]);
    let y = Number(m[3]);
    if (m[3].length === 2) y += 2000;
    const clock = m[4] !== undefined ? parseClock(m[4], m[5], m[6], m[7]) : 0;
    if (clock === undefined) return fail(`"${text}" has an invalid time of day`);
    const dayFirstOk = validYmd(y, b, a);
    const monthFirstOk = validYmd(y, a, b);
    const hasTime = m[4] !== undefined;
    if (order === 'dayFirst') {
      if (!dayFirstOk) return fail(`"${text}" is not a valid day-first date (day/month/year)${monthFirstOk ? '; it would be valid month-first: check the date order' : ''}`);
      return ok({ ms: Date.UTC(y, b - 1, a) + clock, hasTime });
    }
    if (order === 'monthFirst') {
      if (!monthFirstOk) return fail(`"${text}" is not a valid month-first date (month/day/year)${dayFirstOk ? '; it would be valid day-first: check the date order' : ''}`);
      return ok({ ms: Date.UTC(y, a - 1, b) + clock, hasTime });
    }
    if (dayFirstOk && monthFirstOk) {
      return ok({ ms: Date.UTC(y, b - 1, a) + clock, hasTime, order: a === b ? 'same' : 'either' });
    }
    if (dayFirstOk) return ok({ ms: Date.UTC(y, b - 1, a) + clock, hasTime, order: 'dayFirstOnly' });
    if (monthFirstOk) return ok({ ms: Date.UTC(y, a - 1, b) + clock, hasTime, order: 'monthFirstOnly' });
    return fail(`"${text}" is not a valid date`);
  }
  return fail(`"${text.length > 60 ? text.slice(0, 60) + '…' : text}" is not a date (expected e.g. 2024-03-31, 31/03/2024 or a date cell)`);
}

/** Re-read a d/m/y text date in the given order (used once a column's order is settled). */
export function reorderDate(cell: Cell, order: 'dayFirst' | 'monthFirst', date1904 = false): Parsed<WallTime> {
  return parseDateCell(cell, order, date1904);
}

/** A time of day from a cell (fraction-of-day serial, or text "14:30", "2:30 PM", "1430"): ms after midnight. */
export function parseTimeCell(cell: Cell | undefined): Parsed<number> {
  if (!cell) return fail('the time is empty');
  if (cell.kind === 'date' || cell.kind === 'number') {
    const v = cell.raw as number;
    if (!(v >= 0)) return fail(`${cell.text} is not a time of day`);
    if (cell.kind === 'number' && v >= 1) return fail(`${cell.text} is not a time of day (expected e.g. 14:30)`);
    const frac = v - Math.floor(v);
    return ok(Math.round(frac * 86_400) * 1000);
  }
  if (cell.kind !== 'text') return fail(`"${cell.text}" is not a time of day`);
  const text = cellText(cell);
  const m = /^(\d{1,2})[:.h](\d{2})(?::(\d{2}))?\s*([AaPp]\.?[Mm]\.?)?$/.exec(text) ?? /^(\d{2})(\d{2})()()$/.exec(text);
  if (!m) return fail(`"${text.length > 60 ? text.slice(0, 60) + '…' : text}" is not a time of day (expected e.g. 14:30)`);
  const clock = parseClock(m[1], m[2], m[3] || undefined, m[4] || undefined);
  if (clock === undefined) return fail(`"${text}" is not a valid time of day`);
  return ok(clock);
}

export function wallMsToIso(ms: number): string {
  const d = new Date(ms);
  const p = (n: number) => String(n).padStart(2, '0');
  return `${d.getUTCFullYear()}-${p(d.getUTCMonth() + 1)}-${p(d.getUTCDate())} ${p(d.getUTCHours())}:${p(d.getUTCMinutes())}`;
}

export function wallMsToHours(ms: number): number {
  return ms / MS_H;
}

// ---------------------------------------------------------------------------------------------
// Clock changes (daylight saving)

/**
 * Which clock-change calendar to check against. 'eu': last Sunday of March and of October
 * (EU Directive 2000/84/EC, from memory); 'us': second Sunday of March, first Sunday of November
 * (US Energy Policy Act 2005, from memory); 'none': no check.
 */
export type ClockChangeRule = 'eu' | 'us' | 'none';

export interface ClockChange {
  /** Wall ms of local 02:00 on the day of the change (the hour that is skipped or repeated). */
  atMs: number;
  /** +1: clocks go forward (written times overstate the elapsed time by 1 h); -1: back. */
  shiftH: 1 | -1;
  date: string;
}

function nthSunday(y: number, month0: number, n: number): number {
  const first = new Date(Date.UTC(y, month0, 1)).getUTCDay();
  const day = 1 + ((7 - first) % 7) + 7 * (n - 1);
  return Date.UTC(y, month0, day);
}
function lastSunday(y: number, month0: number): number {
  const last = new Date(Date.UTC(y, month0 + 1, 0));
  return last.getTime() - last.getUTCDay() * MS_DAY;
}

const clockChangeCache = new Map<string, ClockChange[]>();

export function clockChangesOfYear(y: number, rule: ClockChangeRule): ClockChange[] {
  if (rule === 'none') return [];
  const key = `${rule}${y}`;
  const hit = clockChangeCache.get(key);
  if (hit) return hit;
  const changes = computeClockChanges(y, rule);
  clockChangeCache.set(key, changes);
  return changes;
}

function computeClockChanges(y: number, rule: 'eu' | 'us'): ClockChange[] {
  const days = rule === 'eu' ? [lastSunday(y, 2), lastSunday(y, 9)] : [nthSunday(y, 2, 2), nthSunday(y, 10, 1)];
  return days.map((d, i) => ({ atMs: d + 2 * MS_H, shiftH: i === 0 ? 1 : -1, date: new Date(d).toISOString().slice(0, 10) }));
}

/** Clock changes strictly inside (startMs, endMs] (wall time). */
export function clockChangesBetween(startMs: number, endMs: number, rule: ClockChangeRule): ClockChange[] {
  if (rule === 'none' || !(endMs > startMs)) return [];
  const y0 = new Date(startMs).getUTCFullYear();
  const y1 = new Date(endMs).getUTCFullYear();
  if (y1 - y0 > 5) return [];
  const out: ClockChange[] = [];
  for (let y = y0; y <= y1; y++) for (const c of clockChangesOfYear(y, rule)) if (c.atMs > startMs && c.atMs <= endMs) out.push(c);
  return out;
}

/** True when a written time falls in the hour skipped when clocks go forward (02:00-02:59 local). */
export function inSkippedHour(ms: number, rule: ClockChangeRule): ClockChange | undefined {
  if (rule === 'none') return undefined;
  const y = new Date(ms).getUTCFullYear();
  for (const c of clockChangesOfYear(y, rule)) if (c.shiftH === 1 && ms >= c.atMs && ms < c.atMs + MS_H) return c;
  return undefined;
}

// ---------------------------------------------------------------------------------------------
// Categorical values

export type Sex = 'F' | 'M';

export function parseSex(text: string): Sex | undefined {
  const t = foldText(text).trim().replace(/\.$/, '');
  if (/^(f|female|w|weiblich|woman|femme|vrouw|v|femmina|mujer)$/.test(t)) return 'F';
  if (/^(m|male|man|mannlich|homme|h|maschio|hombre)$/.test(t)) return 'M';
  return undefined;
}

export type RouteWord = 'bolus' | 'infusion' | 'oral';

export function parseRoute(text: string): RouteWord | undefined {
  const t = foldText(text).trim();
  if (t === '') return undefined;
  if (/(infus|perfus|\bivi\b|\bciv\b|drip|\bivpb\b|\bcont)/.test(t)) return 'infusion';
  if (/(^|\W)(po|p\.o\.?|oral|orally|per os|tablet|tab|capsule|caps|enteral|ng tube|peroral)(\W|$)/.test(t)) return 'oral';
  if (/(bolus|push|\biv\b|i\.v\.?|intravenous|intraveneus|intraveineuse|\bim\b|i\.m\.?|intramuscular)/.test(t)) return 'bolus';
  return undefined;
}

export type EventKind = 'dose' | 'level';

export function parseKind(text: string): EventKind | undefined {
  const t = foldText(text).trim();
  if (/^(dose|dosing|admin|administration|administered|given|gabe|dosis|adm|drug|med|medication|d|1)$/.test(t)) return 'dose';
  if (/^(level|levels|sample|sampling|conc|concentration|result|lab|obs|observation|spiegel|taux|niveau|l|0|2)$/.test(t)) return 'level';
  if (/dose|admin|given|infus/.test(t)) return 'dose';
  if (/level|sample|conc|result|spiegel/.test(t)) return 'level';
  return undefined;
}
