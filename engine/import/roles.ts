/**
 * Column roles: suggested from header words (English, German, French, Dutch, Spanish, Italian
 * common words) and value patterns; the mapping template (JSON, versioned) that remembers the
 * confirmed roles; and applying a template to a new export, reporting where it no longer fits.
 */
import type { Route } from '../data/types.js';
import { detectHeaderRow, profileColumns, columnLetter, type ColumnProfile, type ColumnType, type SheetModel, type WorkbookModel } from './workbook.js';
import { foldText, normaliseUnit, levelFactorToMgL, doseFactorToMg, creatinineFactorToUmolL, DEFAULT_EXCLUDE_WORDS, type ClockChangeRule, type DateOrder, type DecimalSeparator } from './values.js';
import defaults from '../../resources/import/importDefaults.json' with { type: 'json' };
import { unknownKeyProblems } from '../json/knownKeys.js';

export const ROLES = [
  'patientId',
  'dateTime',
  'date',
  'time',
  'elapsedH',
  'kind',
  'doseAmount',
  'doseUnit',
  'route',
  'infusionDuration',
  'infusionStart',
  'infusionEnd',
  'infusionRate',
  'steadyStateInterval',
  'levelValue',
  'levelUnit',
  'lloq',
  'censoredFlag',
  'comment',
  'weight',
  'height',
  'age',
  'birthDate',
  'sex',
  'creatinine',
  'creatinineUnit',
  'covariate',
  'ignore',
] as const;
export type Role = (typeof ROLES)[number];

export type SheetContent = 'doses' | 'levels' | 'events' | 'patients';

export interface ColumnMapping {
  role: Role;
  /** Header text as it appears in the file; columns are found again by it (they may move). */
  header: string;
  /** Column letter when the mapping was made (shown in reports; not used to find the column). */
  column: string;
  /** Covariate name in the dataset, for role 'covariate' (and to rename the standard ones). */
  name?: string;
  /** Unit of the values when the sheet has no unit column (e.g. "mg/L", "min", "umol/L"). */
  unit?: string;
  /** Column type when the mapping was made; a change is reported. */
  type?: ColumnType;
  /** Why the column is ignored (or how it was mapped), for the report. */
  note?: string;
}

export interface SheetMapping {
  sheet: string;
  content: SheetContent;
  /** Header row as the spreadsheet numbers it (1-based). */
  headerRow: number;
  columns: ColumnMapping[];
}

export interface ImportOptions {
  /** How to read text dates like 03/04/2024. 'auto' settles it per column and reports when it cannot. */
  dateOrder: DateOrder;
  decimalSeparator: DecimalSeparator;
  drug?: string;
  /** Molar mass of the drug (g/mol) for umol/L or nmol/L levels. */
  molarMassGPerMol?: number;
  /** LLOQ (mg/L) for levels reported as BLQ/ND without a limit and without an LLOQ column. */
  defaultLloqMgL?: number;
  /** Route when there is no route column (or the cell is empty). */
  defaultRoute?: Route;
  clockChanges: ClockChangeRule;
  /** Gap between consecutive events of one patient above which a wrong date is suspected (h). */
  maxGapH: number;
  /** Sample-comment words that exclude a level (whole words, accents and case folded). */
  excludeCommentWords: string[];
}

export interface MappingTemplate {
  format: 'plateau-import-mapping';
  version: 1;
  sheets: SheetMapping[];
  options: ImportOptions;
}

export function defaultOptions(): ImportOptions {
  return {
    dateOrder: 'auto',
    decimalSeparator: 'auto',
    clockChanges: 'eu',
    maxGapH: defaults.maxGapBetweenEventsH,
    excludeCommentWords: [...DEFAULT_EXCLUDE_WORDS],
  };
}

// ---------------------------------------------------------------------------------------------
// Suggestion

/** Words that name the moment of an event; they mean a date-time only in a column of dates. */
const EVENT_TIME_WORDS = /(collected|collection|sampled|given at|administered|drawn|horodatage|abnahme|entnahme|prelevement|^when$|^wann$|^quand$|^moment$)/;

/** Creatinine clearance columns (checked before creatinine itself). */
const CRCL_HEADER = /(crcl|clcr|creatinine clearance|kreatinin.?clearance|clairance)/;

/** Header patterns in priority order (first match wins). Folded text: lower case, no accents. */
const HEADER_RULES: readonly [Role, RegExp][] = [
  ['birthDate', /(birth|\bdob\b|geburt|naissance|geboorte|nacimiento|nascita)/],
  ['creatinineUnit', /(creat|krea|\bscr\b).*(unit|einheit|unite|eenheid)/],
  ['doseUnit', /(dose|amount|dosis|menge).*(unit|einheit|unite|eenheid)/],
  ['levelUnit', /(level|result|conc|value|wert).*(unit|einheit|unite|eenheid)/],
  ['censoredFlag', /^(censored|cens|blq|bloq|blq flag|below lloq|below loq)$/],
  ['lloq', /(lloq|\bloq\b|\blod\b|lower limit|quantification|quantifizierung|bestimmungsgrenze|nachweisgrenze)/],
  ['covariate', CRCL_HEADER],
  ['creatinine', /(creat|krea|\bscr\b)/],
  ['infusionDuration', /(duration|dauer|duree|\blength of infusion|infusion time|over \(?(min|h))/],
  // "Infusion (min)", "Perfusion [h]": an infusion column whose header names a time unit is its duration.
  ['infusionDuration', /(infus|perfus|drip).*[([]\s*(min|mins|minutes|h|hr|hrs|hours|std)\s*[)\]]/],
  ['infusionRate', /(\brate\b|infusion speed|laufrate|debit|snelheid)/],
  ['infusionStart', /(infusion|infus).*(start|begin)|^(start|begin)(\s|$)/],
  ['infusionEnd', /(infusion|infus).*(end|stop|finish)|^(end|stop|ende|fin)(\s|$)/],
  ['steadyStateInterval', /(steady.?state|ss.interval|\bii\b)/],
  ['patientId', /(patient|\bpat\b|\bmrn\b|subject|\bsubj\b|^id$|\bid\b|hospital n|\bnhs\b|fallnummer|dossier|\bpid\b|record n|\bipp\b)/],
  ['elapsedH', /(elapsed|time since|hours from|\btad\b|\btsfd\b|^time \(?h\)?$|^t \(?h\)?$|time_h|zeit \(?h\)?$)/],
  ['dateTime', /(date.?time|datetime|timestamp|zeitpunkt|date et heure|datum.?tijd|date.{0,3}heure|datum.{0,3}(uhr)?zeit|date and time|date & time)/],
  ['date', /(^|\s)(date|datum|day|dag|fecha|data|jour)(\s|$|\W)/],
  ['time', /(^|\s)(time|uhrzeit|zeit|heure|tijd|hora|ora|clock)(\s|$|\W)/],
  ['dateTime', EVENT_TIME_WORDS],
  ['kind', /(^|\s)(type|kind|event|art|record type|category|kategorie|evid)(\s|$|\W)/],
  ['route', /(route|applikation|\bvoie\b|toediening|\bvia\b|administration route)/],
  ['doseAmount', /(dose|amount|dosis|menge|dosage|posologie|given|administered)/],
  ['comment', /(comment|remark|note|bemerkung|kommentar|remarque|opmerking|\bflag\b|status|observacion)/],
  ['weight', /(weight|\bwt\b|gewicht|poids|peso|body mass)/],
  ['height', /(height|\bht\b|grosse|taille|lengte|altura|body length)/],
  ['age', /(^|[\s_])(age|alter|leeftijd|edad|eta)([\s_]|$|\W)/],
  ['sex', /(sex|gender|geschlecht|sexe|geslacht|sesso|sexo)/],
  ['levelValue', /(level|result|conc|value|spiegel|wert|taux|resultat|uitslag|trough|peak|vancomycin|gentamicin|tobramycin|amikacin|teicoplanin)/],
];

const UNIT_HEADER = /^(unit|units|einheit|unite|eenheid|unidad|unita)$/;

/** A unit written in a header: "Dose (mg)", "Level [mg/L]", "Creatinine, umol/L", "Weight kg". */
export function unitFromHeader(header: string): string | undefined {
  const m = /[([]\s*([^)\]]{1,16})\s*[)\]]/.exec(header);
  const candidates: string[] = [];
  if (m) candidates.push(m[1]);
  // snake_case headers: amount_mg, conc_mg_L, time_h
  const snake = /^[A-Za-z]+_([A-Za-z]+(?:_[A-Za-z]+)?)$/.exec(header.trim());
  if (snake) candidates.push(snake[1].replace('_', '/'));
  const tail = /[\s,]([A-Za-zµμ/]{1,10}\/?[A-Za-z]{0,3})\s*$/.exec(header);
  if (tail) candidates.push(tail[1]);
  for (const c of candidates) {
    const u = normaliseUnit(c);
    if (levelFactorToMgL(u, 1).ok || doseFactorToMg(u).ok || creatinineFactorToUmolL(u).ok || ['kg', 'g', 'lb', 'cm', 'm', 'in', 'h', 'min', 'mg/h', 'y', 'years', 'months', 'weeks', 'days'].includes(u))
      return c.trim();
  }
  return undefined;
}

function suggestRole(header: string, profile: ColumnProfile): Role {
  const h = foldText(header).trim();
  if (h === '') return 'ignore';
  if (UNIT_HEADER.test(h)) return 'ignore'; // assigned to the value column on its left below
  for (const [role, re] of HEADER_RULES) {
    if (!re.test(h)) continue;
    if (re === EVENT_TIME_WORDS && profile.type !== 'date') continue;
    if (role === 'date' && profile.type === 'time') return 'time';
    // "Sample time" holding full date-times is the moment of the event, not a time of day.
    if (role === 'time' && profile.type === 'date') return 'dateTime';
    if (role === 'time' && (profile.type === 'number' || /\(h\)|hours|\bh\b/.test(h))) return 'elapsedH';
    if (role === 'date' && /time|zeit|heure|tijd/.test(h)) return 'dateTime';
    if (role === 'infusionStart' && profile.type === 'number') return 'ignore';
    // "Administered", "Given": a date column is the time of the dose, not its amount.
    if (profile.type === 'date' && ['doseAmount', 'levelValue', 'comment', 'kind'].includes(role)) return 'dateTime';
    return role;
  }
  return 'ignore';
}

function hasClock(p: ColumnProfile): boolean {
  return p.samples.some((s) => /\d{1,2}:\d{2}/.test(s));
}

/** Unit words kept as written when they follow the name in a snake_case header (crcl_mL_min). */
const UNIT_TOKENS: ReadonlySet<string> = new Set(['mL', 'L', 'dL', 'mg', 'g', 'kg', 'ug', 'ng', 'umol', 'mmol', 'nmol', 'mol', 'min', 'h', 's', 'd', 'y', 'cm', 'm', 'mm', 'IU', 'U', 'mU', 'mEq', 'mmHg', 'pct']);

/**
 * Canonical covariate name from a header: lower snake case, the unit kept as written after the
 * name ("CrCl (mL/min)" -> crcl_mL_min, "Albumin g/L" -> albumin_g_L, "Ward" -> ward).
 */
export function canonicalCovariateName(header: string): string {
  let h = header.normalize('NFKD').replace(/[\u0300-\u036f]/g, '').replace(/[µμ]/g, 'u').replace(/%/g, ' pct ').trim();
  let unitPart = '';
  const br = /[([]\s*([^)\]]*)[)\]]/.exec(h);
  if (br) {
    unitPart = br[1];
    h = `${h.slice(0, br.index)} ${h.slice(br.index + br[0].length)}`;
  } else {
    const tail = /(?:^|[\s,_])([A-Za-z]+\/[A-Za-z0-9.]+)\s*$/.exec(h);
    if (tail) {
      unitPart = tail[1];
      h = h.slice(0, tail.index);
    }
  }
  const words = h.split(/[^A-Za-z0-9]+/).filter(Boolean);
  const units = unitPart.split(/[^A-Za-z0-9]+/).filter(Boolean);
  let out = [...words.map((w, i) => (i > 0 && UNIT_TOKENS.has(w) ? w : w.toLowerCase())), ...units].join('_');
  if (out === '') out = 'covariate';
  if (/^[0-9]/.test(out)) out = `c_${out}`;
  return out;
}

/** Headers of columns that identify a person; they never become covariates (data minimisation). */
const IDENTIFYING_HEADER = /\b(name|names|surname|forename|first ?name|last ?name|family ?name|given ?name|nom|prenom|nombre|apellidos?|address|street|postcode|zip|phone|telephone|mobile|e-?mail|mrn|nhs|ssn|insurance|passport|record ?(no|number))\b/i;

/**
 * Why a column not recognised by its header is not a patient covariate, or undefined when it is
 * one: empty, dates or times (moments, not patient traits), or text that is the same on every
 * row (a drug or test name) or that changes within one patient (an order or sample label).
 */
function notCovariate(sheet: SheetModel, headerIndex: number, p: ColumnProfile, pidIndex: number): string | undefined {
  if (p.type === 'empty') return 'the column is empty';
  if (p.type === 'date' || p.type === 'time') return `the column holds ${p.type === 'date' ? 'dates' : 'times'} that no role uses; give it a role if it matters`;
  if (p.type === 'number') return undefined;
  const first = new Map<string, string>();
  const distinct = new Set<string>();
  let varies = false;
  const end = Math.min(sheet.rows.length, headerIndex + 1 + 2000);
  for (let r = headerIndex + 1; r < end; r++) {
    const v = (sheet.rows[r]?.[p.index]?.text ?? '').trim();
    if (v === '') continue;
    distinct.add(v);
    if (pidIndex < 0) continue;
    const pid = (sheet.rows[r]?.[pidIndex]?.text ?? '').trim();
    const prev = first.get(pid);
    if (prev === undefined) first.set(pid, v);
    else if (prev !== v) varies = true;
  }
  if (distinct.size <= 1) return `the same text ("${[...distinct][0] ?? ''}") on every row: it says nothing about the patient`;
  if (varies) return 'the text changes within one patient, so it is not a patient covariate; give it a role if it matters';
  return undefined;
}

export interface SheetSuggestion {
  mapping: SheetMapping | undefined;
  /** Why a sheet was left out, when it was. */
  skipped?: string;
  /** Set when the sheet holds doses or levels but cannot be imported: its rows must be listed. */
  dataHeaderIndex?: number;
}

/** Suggest the roles of one sheet's columns; a sheet with neither doses, levels nor covariates is left out. */
export function suggestSheet(sheet: SheetModel): SheetSuggestion {
  const headerIndex = detectHeaderRow(sheet);
  const profiles = profileColumns(sheet, headerIndex);
  const columns: ColumnMapping[] = [];
  const used = new Set<Role>();
  let lastValueRole: Role | undefined;
  for (const p of profiles) {
    if (p.header === '' && p.type === 'empty') continue;
    let role = suggestRole(p.header, p);
    const h = foldText(p.header).trim();
    if (UNIT_HEADER.test(h) && lastValueRole) {
      role = lastValueRole === 'doseAmount' ? 'doseUnit' : lastValueRole === 'creatinine' ? 'creatinineUnit' : 'levelUnit';
    }
    let note: string | undefined;
    // One column per role (except covariates and ignored): later duplicates become ignored.
    if (role !== 'covariate' && role !== 'ignore' && used.has(role)) {
      note = `a second ${role} column (the first one is used)`;
      role = 'ignore';
    }
    if (role === 'dateTime' && (used.has('date') || used.has('time'))) {
      const d = columns.find((c) => c.role === 'date');
      if (d && !used.has('time') && hasClock(p)) {
        // Full date-times win over a date-only column: that one would give midnight.
        d.role = 'ignore';
        d.note = `the date is also in column ${p.letter} (${p.header}), which carries the time`;
        used.delete('date');
      } else {
        note = 'the date and time are already taken from the date and time columns';
        role = 'ignore';
      }
    }
    if (role !== 'ignore') used.add(role);
    if (role === 'doseAmount' || role === 'levelValue' || role === 'creatinine') lastValueRole = role;
    const col: ColumnMapping = { role, header: p.header, column: p.letter, type: p.type };
    if (note) col.note = note;
    if (role === 'covariate') col.name = CRCL_HEADER.test(h) && !/l\s*\/\s*h/.test(h) ? 'crcl_mL_min' : canonicalCovariateName(p.header);
    const unit = unitFromHeader(p.header);
    if (unit && ['doseAmount', 'levelValue', 'lloq', 'creatinine', 'weight', 'height', 'age', 'infusionDuration', 'infusionRate', 'elapsedH'].includes(role)) col.unit = unit;
    else if (['weight', 'height', 'age'].includes(role)) {
      // These have a default unit (kg, cm, years): a bracketed unit Plateau does not know
      // ("Age (months)", "Weight (st)") is kept, so the import names it instead of assuming the default.
      const bracket = /[([]\s*([^)\]]{1,16})\s*[)\]]/.exec(p.header);
      if (bracket) col.unit = bracket[1].trim();
    }
    columns.push(col);
  }
  // A date column that carries times of day is a date-time column.
  const date = columns.find((c) => c.role === 'date');
  if (date && !used.has('time') && !used.has('dateTime')) {
    const p = profiles.find((q) => q.letter === date.column);
    if (p && p.samples.some((s) => /\d{1,2}:\d{2}/.test(s))) date.role = 'dateTime';
  }
  // Value patterns: no time role from the headers, but a column of dates (and one of times).
  if (!columns.some((c) => ['dateTime', 'date', 'elapsedH', 'infusionStart'].includes(c.role))) {
    const dateCol = columns.find((c) => c.role === 'ignore' && c.type === 'date');
    if (dateCol) {
      const timeCol = columns.find((c) => c.role === 'ignore' && c.type === 'time');
      const p = profiles.find((q) => q.letter === dateCol.column);
      dateCol.role = timeCol || !(p && p.samples.some((x) => /\d{1,2}:\d{2}/.test(x))) ? 'date' : 'dateTime';
      if (timeCol) timeCol.role = 'time';
    }
  }
  // Any other column with values: a covariate, unless its values say it is not one.
  const pidCol = columns.find((c) => c.role === 'patientId');
  for (const col of columns) {
    if (col.role !== 'ignore' || col.note || col.header === '' || UNIT_HEADER.test(foldText(col.header).trim())) continue;
    if (IDENTIFYING_HEADER.test(foldText(col.header))) {
      col.note = 'the column looks like patient-identifying information (a name, address, contact or record number): it is not imported; the patient id column is all Plateau needs';
      continue;
    }
    const p = profiles.find((q) => q.letter === col.column)!;
    const why = notCovariate(sheet, headerIndex, p, pidCol ? profiles.find((q) => q.letter === pidCol.column)!.index : -1);
    if (why) col.note = why;
    else {
      col.role = 'covariate';
      col.name = canonicalCovariateName(col.header);
    }
  }
  const has = (r: Role) => columns.some((c) => c.role === r);
  let content: SheetContent | undefined;
  if (has('doseAmount') && has('levelValue')) content = 'events';
  else if (has('doseAmount')) content = 'doses';
  else if (has('levelValue')) content = 'levels';
  else if (has('patientId') && columns.some((c) => ['weight', 'height', 'age', 'birthDate', 'sex', 'creatinine'].includes(c.role))) content = 'patients';
  if (content && content !== 'patients' && !has('patientId'))
    return { mapping: undefined, skipped: `sheet "${sheet.name}": it holds ${content} but no column was recognised as the patient id, so its rows are not imported; give the id column the role patientId in a mapping`, dataHeaderIndex: headerIndex };
  if (!content || !has('patientId')) {
    return { mapping: undefined, skipped: `sheet "${sheet.name}": no patient id with doses, levels or covariates found` };
  }
  return { mapping: { sheet: sheet.name, content, headerRow: headerIndex + 1, columns } };
}

/** A full template suggested from a workbook. */
export function suggestMapping(
  model: WorkbookModel,
  options: Partial<ImportOptions> = {},
): { template: MappingTemplate; skipped: string[]; unimported: { sheet: SheetModel; headerIndex: number; reason: string }[] } {
  const sheets: SheetMapping[] = [];
  const skipped: string[] = [];
  const unimported: { sheet: SheetModel; headerIndex: number; reason: string }[] = [];
  for (const s of model.sheets) {
    const r = suggestSheet(s);
    if (r.mapping) sheets.push(r.mapping);
    else if (r.skipped) skipped.push(r.skipped);
    if (r.dataHeaderIndex !== undefined) unimported.push({ sheet: s, headerIndex: r.dataHeaderIndex, reason: r.skipped ?? 'the sheet cannot be imported' });
  }
  return { template: { format: 'plateau-import-mapping', version: 1, sheets, options: { ...defaultOptions(), ...options } }, skipped, unimported };
}

// ---------------------------------------------------------------------------------------------
// Template JSON: parse and validate (a template file is untrusted input too)

export class TemplateError extends Error {
  readonly problems: string[];
  constructor(problems: string[]) {
    super(`the mapping template is not valid:\n${problems.join('\n')}`);
    this.name = 'TemplateError';
    this.problems = problems;
  }
}

const ROLE_SET: ReadonlySet<string> = new Set(ROLES);
const CONTENTS: ReadonlySet<string> = new Set(['doses', 'levels', 'events', 'patients']);

function isRecord(x: unknown): x is Record<string, unknown> {
  return typeof x === 'object' && x !== null && !Array.isArray(x);
}

const TEMPLATE_KEYS = ['format', 'version', 'sheets', 'options'];
const SHEET_KEYS = ['sheet', 'content', 'headerRow', 'columns'];
const COLUMN_KEYS = ['role', 'header', 'column', 'name', 'unit', 'type', 'note'];
const OPTION_KEYS = ['dateOrder', 'decimalSeparator', 'drug', 'molarMassGPerMol', 'defaultLloqMgL', 'defaultRoute', 'clockChanges', 'maxGapH', 'excludeCommentWords'];

/** Validate a parsed JSON value as a mapping template; every problem with its JSON path. */
export function parseTemplate(json: unknown): MappingTemplate {
  const p: string[] = [];
  if (!isRecord(json)) throw new TemplateError(['$: expected an object']);
  // Strict keys: a misspelt key ("defaultRout") is named with the nearest known key, never ignored.
  p.push(...unknownKeyProblems(json, TEMPLATE_KEYS, '$'));
  if (json.format !== 'plateau-import-mapping') p.push('$.format: expected "plateau-import-mapping"');
  if (json.version !== 1) p.push(`$.version: expected 1, got ${JSON.stringify(json.version)}`);
  const sheets: SheetMapping[] = [];
  if (!Array.isArray(json.sheets) || json.sheets.length === 0) p.push('$.sheets: expected a non-empty array');
  else
    json.sheets.forEach((s: unknown, i: number) => {
      const at = `$.sheets[${i}]`;
      if (!isRecord(s)) return void p.push(`${at}: expected an object`);
      p.push(...unknownKeyProblems(s, SHEET_KEYS, at));
      if (typeof s.sheet !== 'string' || s.sheet === '') p.push(`${at}.sheet: expected the sheet name`);
      if (typeof s.content !== 'string' || !CONTENTS.has(s.content)) p.push(`${at}.content: expected doses, levels, events or patients`);
      if (!(Number.isInteger(s.headerRow) && (s.headerRow as number) >= 1)) p.push(`${at}.headerRow: expected a row number >= 1`);
      const columns: ColumnMapping[] = [];
      if (!Array.isArray(s.columns)) p.push(`${at}.columns: expected an array`);
      else
        s.columns.forEach((c: unknown, j: number) => {
          const cat = `${at}.columns[${j}]`;
          if (!isRecord(c)) return void p.push(`${cat}: expected an object`);
          p.push(...unknownKeyProblems(c, COLUMN_KEYS, cat));
          if (typeof c.role !== 'string' || !ROLE_SET.has(c.role)) p.push(`${cat}.role: unknown role ${JSON.stringify(c.role)} (one of ${ROLES.join(', ')})`);
          if (typeof c.header !== 'string') p.push(`${cat}.header: expected the header text`);
          if (c.column !== undefined && typeof c.column !== 'string') p.push(`${cat}.column: expected a column letter`);
          for (const k of ['name', 'unit', 'type', 'note'] as const) if (c[k] !== undefined && typeof c[k] !== 'string') p.push(`${cat}.${k}: expected text`);
          const col: ColumnMapping = { role: c.role as Role, header: String(c.header ?? ''), column: typeof c.column === 'string' ? c.column : '' };
          if (typeof c.name === 'string') col.name = c.name;
          if (typeof c.unit === 'string') col.unit = c.unit;
          if (typeof c.type === 'string') col.type = c.type as ColumnType;
          if (typeof c.note === 'string') col.note = c.note;
          columns.push(col);
        });
      sheets.push({ sheet: String(s.sheet ?? ''), content: s.content as SheetContent, headerRow: Number(s.headerRow), columns });
    });
  const o = isRecord(json.options) ? json.options : {};
  if (json.options !== undefined && !isRecord(json.options)) p.push('$.options: expected an object');
  p.push(...unknownKeyProblems(o, OPTION_KEYS, '$.options'));
  const options = defaultOptions();
  if (o.dateOrder !== undefined) {
    if (o.dateOrder === 'dayFirst' || o.dateOrder === 'monthFirst' || o.dateOrder === 'auto') options.dateOrder = o.dateOrder;
    else p.push('$.options.dateOrder: expected dayFirst, monthFirst or auto');
  }
  if (o.decimalSeparator !== undefined) {
    if (o.decimalSeparator === 'dot' || o.decimalSeparator === 'comma' || o.decimalSeparator === 'auto') options.decimalSeparator = o.decimalSeparator;
    else p.push('$.options.decimalSeparator: expected dot, comma or auto');
  }
  if (o.clockChanges !== undefined) {
    if (o.clockChanges === 'eu' || o.clockChanges === 'us' || o.clockChanges === 'none') options.clockChanges = o.clockChanges;
    else p.push('$.options.clockChanges: expected eu, us or none');
  }
  if (o.drug !== undefined) {
    if (typeof o.drug === 'string') options.drug = o.drug;
    else p.push('$.options.drug: expected text');
  }
  for (const k of ['molarMassGPerMol', 'defaultLloqMgL', 'maxGapH'] as const) {
    if (o[k] === undefined || o[k] === null) continue;
    if (typeof o[k] === 'number' && Number.isFinite(o[k]) && (o[k] as number) > 0) options[k] = o[k] as number;
    else p.push(`$.options.${k}: expected a number > 0`);
  }
  if (o.defaultRoute !== undefined) {
    if (o.defaultRoute === 'bolus' || o.defaultRoute === 'infusion' || o.defaultRoute === 'oral') options.defaultRoute = o.defaultRoute;
    else p.push('$.options.defaultRoute: expected bolus, infusion or oral');
  }
  if (o.excludeCommentWords !== undefined) {
    if (Array.isArray(o.excludeCommentWords) && o.excludeCommentWords.every((w) => typeof w === 'string')) options.excludeCommentWords = [...(o.excludeCommentWords as string[])];
    else p.push('$.options.excludeCommentWords: expected a list of words');
  }
  if (p.length) throw new TemplateError(p);
  return { format: 'plateau-import-mapping', version: 1, sheets, options };
}

// ---------------------------------------------------------------------------------------------
// Applying a template to a workbook

export interface ReportProblem {
  sheet: string;
  /** Row as the spreadsheet shows it (1-based); 0 when the problem is not tied to a row. */
  row: number;
  /** Column letter and header, e.g. "C (Dose mg)"; '' when not tied to a column. */
  column: string;
  value: string;
  severity: 'error' | 'warning';
  message: string;
}

/** A sheet mapping bound to a sheet of the workbook: column indexes by role. */
export interface BoundSheet {
  mapping: SheetMapping;
  sheet: SheetModel;
  /** 0-based header row index in the sheet. */
  headerIndex: number;
  /** Role -> bound column (one per role; covariates in `covariates`). */
  columns: Map<Role, BoundColumn>;
  covariates: BoundColumn[];
}

export interface BoundColumn {
  index: number;
  label: string;
  mapping: ColumnMapping;
}

function headerKey(s: string): string {
  return foldText(s).replace(/\s+/g, ' ').trim();
}

function rowHeaders(sheet: SheetModel, r: number): string[] {
  const row = sheet.rows[r] ?? [];
  const out: string[] = [];
  for (let c = 0; c < row.length; c++) out.push(headerKey(row[c]?.text ?? ''));
  return out;
}

const ESSENTIAL: ReadonlySet<Role> = new Set(['patientId', 'doseAmount', 'levelValue', 'dateTime', 'date', 'time', 'elapsedH', 'kind']);

export function columnLabel(index: number, header: string): string {
  return header ? `${columnLetter(index)} (${header})` : columnLetter(index);
}

/**
 * Bind a template to a workbook: find each sheet, its header row and each column by its header
 * text. Reports: sheet missing, header row moved, column missing (error when essential), column
 * type changed (warning). A sheet that cannot be bound is left out with an error.
 */
export function bindTemplate(model: WorkbookModel, template: MappingTemplate): { bound: BoundSheet[]; unbound: UnboundSheet[]; problems: ReportProblem[] } {
  const problems: ReportProblem[] = [];
  const bound: BoundSheet[] = [];
  const unbound: UnboundSheet[] = [];
  for (const sm of template.sheets) {
    let sheet = model.sheets.find((s) => s.name === sm.sheet) ?? model.sheets.find((s) => headerKey(s.name) === headerKey(sm.sheet));
    if (!sheet && template.sheets.length === 1 && model.sheets.length === 1) {
      sheet = model.sheets[0];
      problems.push({ sheet: sheet.name, row: 0, column: '', value: sheet.name, severity: 'warning', message: `the template expects sheet "${sm.sheet}"; the file's only sheet "${sheet.name}" is used instead` });
    }
    if (!sheet) {
      problems.push({ sheet: sm.sheet, row: 0, column: '', value: '', severity: 'error', message: `sheet "${sm.sheet}" is not in the file (sheets: ${model.sheets.map((s) => `"${s.name}"`).join(', ')}): rename the sheet or make a new mapping` });
      continue;
    }
    const wanted = sm.columns.filter((c) => c.role !== 'ignore' && c.header !== '').map((c) => headerKey(c.header));
    const score = (r: number) => {
      const hs = new Set(rowHeaders(sheet!, r));
      let n = 0;
      for (const w of wanted) if (hs.has(w)) n++;
      return n;
    };
    let headerIndex = sm.headerRow - 1;
    if (score(headerIndex) < wanted.length) {
      let best = headerIndex;
      let bestScore = score(headerIndex);
      for (let r = 0; r < Math.min(sheet.rows.length, 40); r++) {
        const s = score(r);
        if (s > bestScore) {
          best = r;
          bestScore = s;
        }
      }
      if (best !== headerIndex) {
        problems.push({ sheet: sheet.name, row: best + 1, column: '', value: '', severity: 'warning', message: `the header row moved from row ${sm.headerRow} to row ${best + 1}` });
        headerIndex = best;
      }
    }
    const headers = rowHeaders(sheet, headerIndex);
    const profiles = profileColumns(sheet, headerIndex, 500);
    const columns = new Map<Role, BoundColumn>();
    const covariates: BoundColumn[] = [];
    let fatal = false;
    const occurrences = new Map<string, number>();
    for (const cm of sm.columns) {
      const key = headerKey(cm.header);
      // Columns with the same header ("Unit", "Einheit") are told apart by their order.
      const nth = occurrences.get(key) ?? 0;
      occurrences.set(key, nth + 1);
      if (cm.role === 'ignore') continue;
      let index = -1;
      if (key !== '') {
        let seenCount = 0;
        for (let i = 0; i < headers.length; i++) {
          if (headers[i] !== key) continue;
          if (seenCount === nth) {
            index = i;
            break;
          }
          seenCount++;
        }
      }
      if (index < 0 && key === '' && cm.column) {
        // A column without a header can only be found by its letter.
        let n = 0;
        for (const ch of cm.column.toUpperCase()) n = n * 26 + (ch.charCodeAt(0) - 64);
        index = n - 1;
      }
      if (index < 0) {
        const essential = ESSENTIAL.has(cm.role);
        if (essential) fatal = true;
        problems.push({
          sheet: sheet.name,
          row: headerIndex + 1,
          column: cm.column ? `${cm.column} (${cm.header})` : cm.header,
          value: cm.header,
          severity: essential ? 'error' : 'warning',
          message: `column "${cm.header}" (${cm.role}) is not in the header row any more${essential ? ': the sheet cannot be imported; fix the export or make a new mapping' : ': its values are left out'}`,
        });
        continue;
      }
      const label = columnLabel(index, sheet.rows[headerIndex]?.[index]?.text.trim() ?? cm.header);
      const prof = profiles[index];
      if (cm.type && prof && prof.type !== cm.type && prof.type !== 'empty' && cm.type !== 'empty' && cm.type !== 'mixed' && prof.type !== 'mixed') {
        problems.push({ sheet: sheet.name, row: headerIndex + 1, column: label, value: prof.samples[0] ?? '', severity: 'warning', message: `column "${cm.header}" held ${cm.type} values when the mapping was saved and now holds ${prof.type} values: check the export settings` });
      }
      const b: BoundColumn = { index, label, mapping: cm };
      if (cm.role === 'covariate') covariates.push(b);
      else if (columns.has(cm.role)) {
        problems.push({ sheet: sheet.name, row: headerIndex + 1, column: label, value: cm.header, severity: 'warning', message: `role ${cm.role} is given to two columns; the first is used` });
      } else columns.set(cm.role, b);
    }
    if (!columns.has('patientId') && !fatal) {
      fatal = true;
      problems.push({ sheet: sheet.name, row: headerIndex + 1, column: '', value: '', severity: 'error', message: 'no column has the role patientId: the sheet cannot be joined to patients' });
    }
    let hasTime = columns.has('dateTime') || columns.has('date') || columns.has('elapsedH') || columns.has('infusionStart');
    const timeCol = columns.get('time');
    if (!hasTime && timeCol && profiles[timeCol.index]?.type === 'date') {
      // The values decide: a "time" column of full date-times is the date-time of the event.
      columns.delete('time');
      columns.set('dateTime', { ...timeCol, mapping: { ...timeCol.mapping, role: 'dateTime' } });
      hasTime = true;
      problems.push({ sheet: sheet.name, row: headerIndex + 1, column: timeCol.label, value: profiles[timeCol.index]?.samples[0] ?? '', severity: 'warning', message: `column "${timeCol.mapping.header}" has the role time (time of day) but holds full date-times: it is read as the date-time of each event; save the mapping to keep this` });
    }
    if (!hasTime && sm.content !== 'patients' && !fatal) {
      fatal = true;
      problems.push({ sheet: sheet.name, row: headerIndex + 1, column: '', value: '', severity: 'error', message: 'no time column (dateTime, date + time, or elapsedH): give one column a time role' });
    }
    if (fatal) {
      unbound.push({ sheet, headerIndex, reason: problems.filter((q) => q.sheet === sheet!.name && q.severity === 'error').map((q) => q.message)[0] ?? 'the sheet cannot be imported' });
      continue;
    }
    bound.push({ mapping: sm, sheet, headerIndex, columns, covariates });
  }
  return { bound, unbound, problems };
}

/** A sheet the template names but that cannot be imported; its rows are listed as excluded. */
export interface UnboundSheet {
  sheet: SheetModel;
  headerIndex: number;
  reason: string;
}

/** The template with the header rows and column letters and types as found in this workbook. */
export function refreshTemplate(template: MappingTemplate, bound: readonly BoundSheet[]): MappingTemplate {
  return {
    ...template,
    sheets: template.sheets.map((sm) => {
      const b = bound.find((x) => x.mapping === sm);
      if (!b) return sm;
      const profiles = profileColumns(b.sheet, b.headerIndex, 500);
      return {
        ...sm,
        sheet: b.sheet.name,
        headerRow: b.headerIndex + 1,
        columns: sm.columns.map((c) => {
          const found = [...b.columns.values(), ...b.covariates].find((x) => x.mapping === c || (x.mapping.role === 'dateTime' && c.role === 'time' && x.mapping.header === c.header));
          if (!found) return c;
          const type = profiles[found.index]?.type;
          return { ...c, role: found.mapping.role, column: columnLetter(found.index), ...(type ? { type } : {}) };
        }),
      };
    }),
  };
}
