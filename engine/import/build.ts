/**
 * Bound sheets -> Plateau's canonical dataset plus a validation report. Every row is either
 * used, or excluded with its reason (an error on the row, or an exclusion comment); warnings keep
 * the row. Nothing is dropped silently.
 *
 * Time rule: date-times are taken as written (ward wall clock, no time zone). Hours are counted
 * from each patient's first kept event. A daylight-saving change inside a patient's course makes
 * the written interval 1 h longer (spring) or shorter (autumn) than the real one; the files carry
 * no UTC offset, so this is reported as a warning, not corrected. Elapsed-hours columns are used
 * as they are (not shifted).
 */
import { createDataset, type SubjectInput } from '../data/dataset.js';
import { censoredBeforeFirstDoseMessage, censoredDisagreement, doseKey, duplicateMessage, levelBeforeFirstDoseMessage, levelKey, parseCensoredFlag } from '../data/rules.js';
import { DataError, type CovariateValue, type Dataset, type Dose, type Observation, type Route } from '../data/types.js';
import { columnLetter, type Cell, type WorkbookModel } from './workbook.js';
import { bindTemplate, columnLabel, refreshTemplate, type BoundColumn, type BoundSheet, type MappingTemplate, type ReportProblem, type Role } from './roles.js';
import { cockcroftGault, scrUmolToMgDl, COCKCROFT_GAULT_LABEL } from '../dosing/renal.js';
import {
  buildCommentMatcher,
  cellText,
  clockChangesBetween,
  creatinineFactorToUmolL,
  doseFactorToMg,
  durationFactorToH,
  heightFactorToCm,
  inSkippedHour,
  isBlank,
  levelFactorToMgL,
  lookupMolarMass,
  parseDateCell,
  parseKind,
  parseLevelCell,
  parseNumberCell,
  parseRoute,
  parseSex,
  parseTimeCell,
  rateFactorToMgPerH,
  wallMsToIso,
  weightFactorToKg,
  type Parsed,
  type WallTime,
} from './values.js';

export interface ImportSummary {
  patients: number;
  doses: number;
  levels: number;
  censored: number;
  excludedRows: number;
}

export interface ExcludedRow {
  sheet: string;
  row: number;
  reason: string;
}

export interface ImportReport {
  mapping: MappingTemplate;
  summary: ImportSummary;
  problems: ReportProblem[];
  excluded: ExcludedRow[];
  /** How the file was read (date order chosen, time rule), in plain words. */
  notes: string[];
}

export interface ImportResult {
  /** Undefined when no valid record is left (the report says why). */
  dataset: Dataset | undefined;
  report: ImportReport;
}

/**
 * Canonical covariate names of the dataset, as model specs and patient files use them (unit in
 * the name). Serum creatinine is stored in umol/L.
 */
export const COVARIATE_NAMES = {
  weight: 'weight_kg',
  height: 'height_cm',
  age: 'age_y',
  sex: 'sex',
  creatinine: 'scr_umol_L',
  crcl: 'crcl_mL_min',
} as const;

/** Plausible adult and paediatric ranges (common practice); outside them a warning is given. */
const PLAUSIBLE = {
  weight: [0.3, 350],
  height: [25, 250],
  age: [0, 120],
  creatinine: [10, 2000],
} as const;

const MS_H = 3_600_000;

interface RowCtx {
  sheet: string;
  /** 1-based row as shown. */
  row: number;
  cells: (Cell | undefined)[];
  errors: number;
}

interface PendingEvent {
  kind: 'dose' | 'level';
  /** ms on the wall-clock line ('wall'), or hours as given ('elapsed', kept exact). */
  t: number;
  basis: 'wall' | 'elapsed';
  sheet: string;
  row: number;
  timeColumn: string;
  dose?: { amountMg: number; route: Route; durationH: number; steadyStateIntervalH?: number };
  level?: { valueMgL: number; censored: boolean; lloqMgL?: number };
  key: string;
}

interface CovEntry {
  value: CovariateValue;
  sheet: string;
  row: number;
  column: string;
}

interface PatientAcc {
  id: string;
  order: number;
  events: PendingEvent[];
  covariates: Map<string, CovEntry>;
  covariateWarned: Set<string>;
  birthMs?: CovEntry & { ms: number };
  /** Dose rows of this patient refused with an error (the first-dose rule is then not judged). */
  refusedDoseRows: number;
}

/** Import: bind the template, read every row, check, and build the dataset. */
export function importWorkbook(model: WorkbookModel, template: MappingTemplate): ImportResult {
  const problems: ReportProblem[] = [];
  const excluded: ExcludedRow[] = [];
  const notes: string[] = [
    'Times are taken as written (the ward clock): no time zone is applied and clock changes are not corrected; an interval across a daylight-saving change is reported.',
  ];
  // Damage first: the rows below are then not the whole file, and the report says so.
  for (const d of model.damage ?? []) problems.push({ sheet: d.sheet, row: d.row ?? 0, column: '', value: '', severity: 'error', message: `damaged file: ${d.message}` });
  const { bound, unbound, problems: bindProblems } = bindTemplate(model, template);
  problems.push(...bindProblems);
  // A sheet that cannot be imported: every row with content is listed, none vanishes.
  for (const u of unbound)
    for (let r = u.headerIndex + 1; r < u.sheet.rows.length; r++)
      if ((u.sheet.rows[r] ?? []).some((c) => !isBlank(c))) excluded.push({ sheet: u.sheet.name, row: r + 1, reason: `sheet not imported: ${u.reason}` });
  for (const b of bound) notes.push(...ignoredColumnNotes(b));
  const opts = template.options;
  const matcher = buildCommentMatcher(opts.excludeCommentWords);
  const molarMass = opts.molarMassGPerMol ?? (opts.drug ? lookupMolarMass(opts.drug) : undefined);

  const patients = new Map<string, PatientAcc>();
  const patientOf = (id: string): PatientAcc => {
    let p = patients.get(id);
    if (!p) {
      p = { id, order: patients.size, events: [], covariates: new Map(), covariateWarned: new Set(), refusedDoseRows: 0 };
      patients.set(id, p);
    }
    return p;
  };

  const problem = (ctx: RowCtx, col: BoundColumn | undefined, severity: 'error' | 'warning', message: string, value?: string) => {
    if (severity === 'error') ctx.errors++;
    problems.push({
      sheet: ctx.sheet,
      row: ctx.row,
      column: col ? col.label : '',
      value: value ?? (col ? cellText(ctx.cells[col.index]).slice(0, 200) : ''),
      severity,
      message,
    });
  };

  const dateOrder = settleDateOrder(bound, template, problems, notes);

  for (const b of bound) {
    const get = (r: Role) => b.columns.get(r);
    const cPid = get('patientId')!;
    const sheetName = b.sheet.name;
    const rows = b.sheet.rows;
    const mappedIdx: number[] = [...b.columns.values(), ...b.covariates].map((c) => c.index);
    const headerWidth = (rows[b.headerIndex] ?? []).length;

    for (let r = b.headerIndex + 1; r < rows.length; r++) {
      const cells = rows[r] ?? [];
      let any = false;
      for (const i of mappedIdx)
        if (!isBlank(cells[i])) {
          any = true;
          break;
        }
      if (!any) {
        if (cells.some((c) => !isBlank(c))) excluded.push({ sheet: sheetName, row: r + 1, reason: 'no value in any mapped column (only in ignored columns)' });
        continue;
      }
      const ctx: RowCtx = { sheet: sheetName, row: r + 1, cells, errors: 0 };
      if (model.format === 'csv' && cells.length > headerWidth) {
        // A CSV line with more fields than its header: two lines merged by a damaged line break,
        // or a stray separator. Its values cannot be placed in columns: an error, never ignored.
        for (let c = headerWidth; c < cells.length; c++)
          if (!isBlank(cells[c])) {
            problem(ctx, undefined, 'error', `this line has a value in column ${columnLetter(c)}, beyond the header's last column (${columnLetter(headerWidth - 1)}): a separator or line break in the file may be damaged; compare the line with the source`, cellText(cells[c]).slice(0, 200));
            break;
          }
      }
      const pid = cellText(cells[cPid.index]);
      if (pid === '') {
        problem(ctx, cPid, 'error', 'the patient id is empty: fill it in or delete the row');
        excluded.push({ sheet: sheetName, row: r + 1, reason: 'no patient id' });
        continue;
      }
      if (pid.length > 200) {
        problem(ctx, cPid, 'error', 'the patient id is longer than 200 characters: this is not an id column');
        excluded.push({ sheet: sheetName, row: r + 1, reason: 'invalid patient id' });
        continue;
      }
      const pat = patientOf(pid);
      readCovariates(b, ctx, pat, problem, dateOrder, model.date1904);

      if (b.mapping.content === 'patients') {
        if (ctx.errors > 0) excluded.push({ sheet: sheetName, row: ctx.row, reason: firstError(problems, ctx) });
        continue;
      }

      let kind: 'dose' | 'level' | undefined = b.mapping.content === 'doses' ? 'dose' : b.mapping.content === 'levels' ? 'level' : undefined;
      if (kind === undefined) {
        const ck = get('kind');
        if (ck && !isBlank(cells[ck.index])) {
          kind = parseKind(cellText(cells[ck.index]));
          if (!kind) {
            problem(ctx, ck, 'error', `"${cellText(cells[ck.index])}" is neither a dose nor a level: use words like dose/administration or level/sample`);
          }
        } else {
          const hasDose = get('doseAmount') && !isBlank(cells[get('doseAmount')!.index]);
          const hasLevel = get('levelValue') && !isBlank(cells[get('levelValue')!.index]);
          if (hasDose && !hasLevel) kind = 'dose';
          else if (hasLevel && !hasDose) kind = 'level';
          else if (!hasDose && !hasLevel) {
            // A row with covariates only (e.g. a weight recorded on the ward sheet) feeds the
            // covariates; a row with nothing but an id and a time has lost its value: reported.
            const covariateIdx = b.covariates.map((c) => c.index);
            for (const role of ['weight', 'height', 'age', 'birthDate', 'sex', 'creatinine'] as const) {
              const c = get(role);
              if (c) covariateIdx.push(c.index);
            }
            if (!covariateIdx.some((i) => !isBlank(cells[i])))
              problem(ctx, get('doseAmount') ?? get('levelValue'), 'error', 'the row has a patient id but neither a dose amount nor a level: fill in the value, or delete the row');
            if (ctx.errors > 0) excluded.push({ sheet: sheetName, row: ctx.row, reason: firstError(problems, ctx) });
            continue;
          } else problem(ctx, ck, 'error', 'the row has both a dose amount and a level and no event kind: split it into two rows or map a kind column');
        }
      }
      if (kind === undefined) {
        excluded.push({ sheet: sheetName, row: ctx.row, reason: firstError(problems, ctx) });
        continue;
      }

      const cc = get('comment');
      if (cc) {
        const word = matcher(cellText(cells[cc.index]));
        if (word) {
          // An excluded sample or dose is not checked further: its value may well be empty.
          excluded.push({ sheet: sheetName, row: ctx.row, reason: `${kind} excluded: comment "${cellText(cells[cc.index]).slice(0, 80)}" (${word})` });
          continue;
        }
      }
      const time = readEventTime(b, ctx, kind, problem, dateOrder, model.date1904);
      let ev: PendingEvent | undefined;
      if (kind === 'dose') {
        const dose = readDose(b, ctx, time, problem, dateOrder, model.date1904, opts.defaultRoute);
        if (dose && time) ev = { kind, t: time.t, basis: time.basis, sheet: sheetName, row: ctx.row, timeColumn: time.column, dose, key: doseKey(time.t, dose.amountMg, dose.route, dose.durationH) };
      } else {
        const level = readLevel(b, ctx, problem, molarMass, opts.defaultLloqMgL, opts.decimalSeparator);
        if (level && time) ev = { kind, t: time.t, basis: time.basis, sheet: sheetName, row: ctx.row, timeColumn: time.column, level, key: levelKey(time.t, level.valueMgL, level.censored) };
      }
      if (ctx.errors > 0 || !ev) {
        if (kind === 'dose') pat.refusedDoseRows++;
        excluded.push({ sheet: sheetName, row: ctx.row, reason: firstError(problems, ctx) });
        continue;
      }
      pat.events.push(ev);
    }
  }

  // Patient-level checks and assembly.
  const inputs: SubjectInput[] = [];
  const covNames: string[] = [];
  const covNameSet = new Set<string>();
  const rowExcluded = (sheet: string, row: number, reason: string) => excluded.push({ sheet, row, reason });
  const evProblem = (e: PendingEvent, severity: 'error' | 'warning', message: string, value = '') =>
    problems.push({ sheet: e.sheet, row: e.row, column: e.timeColumn, value, severity, message });

  const ordered = [...patients.values()].sort((a, b) => a.order - b.order);
  // Derive CrCl only from columns mapped as weight/age/sex/creatinine, and only when no CrCl column is given.
  const deriveCrcl =
    bound.some((b) => b.columns.has('creatinine')) &&
    !bound.some((b) => b.covariates.some((c) => (c.mapping.name ?? c.mapping.header) === COVARIATE_NAMES.crcl));
  let derivedCrcl = 0;
  const crclMissing: string[] = [];
  const timelines: PendingEvent[][] = [];
  for (const pat of ordered) {
    const events = pat.events;
    if (events.length === 0) {
      const any = pat.covariates.values().next();
      if (!any.done) {
        const c = any.value;
        problems.push({ sheet: c.sheet, row: c.row, column: '', value: pat.id, severity: 'warning', message: `patient ${pat.id} has covariates but no usable doses or levels: left out of the dataset` });
      }
      continue;
    }
    // One time basis per patient.
    const wall = events.filter((e) => e.basis === 'wall').length;
    let kept = events;
    if (wall > 0 && wall < events.length) {
      const major = wall * 2 >= events.length ? 'wall' : 'elapsed';
      kept = [];
      for (const e of events) {
        if (e.basis === major) kept.push(e);
        else {
          evProblem(e, 'error', `patient ${pat.id} mixes date-times and elapsed hours: this row's ${e.basis === 'elapsed' ? 'elapsed hours' : 'date-time'} cannot be placed on the same time line`);
          rowExcluded(e.sheet, e.row, 'mixed time bases');
        }
      }
    }
    kept.sort((a, b) => a.t - b.t || (a.kind === b.kind ? 0 : a.kind === 'dose' ? -1 : 1) || a.row - b.row);

    // Duplicates (same kind, time and value): the later row is excluded.
    const seen = new Map<string, PendingEvent>();
    const sameTime = new Map<string, PendingEvent>();
    const deduped: PendingEvent[] = [];
    for (const e of kept) {
      const first = seen.get(e.key);
      if (first) {
        evProblem(e, 'error', duplicateMessage(e.kind, `${first.sheet} row ${first.row}`));
        rowExcluded(e.sheet, e.row, `duplicate of ${first.sheet} row ${first.row}`);
        continue;
      }
      seen.set(e.key, e);
      const tk = `${e.kind}|${e.t}`;
      const other = sameTime.get(tk);
      if (other) evProblem(e, 'warning', `a second ${e.kind} at the same time as ${other.sheet} row ${other.row} with a different value: check both rows`);
      else sameTime.set(tk, e);
      deduped.push(e);
    }

    // Levels before the first dose.
    const firstDose = deduped.find((e) => e.kind === 'dose');
    const timeline: PendingEvent[] = [];
    for (const e of deduped) {
      if (e.kind === 'level' && (!firstDose || e.t < firstDose.t)) {
        const where = firstDose ? `${describeT(firstDose)}, ${firstDose.sheet} row ${firstDose.row}` : undefined;
        if (e.level!.censored && where) {
          evProblem(e, 'warning', censoredBeforeFirstDoseMessage(pat.id, where));
        } else if (pat.refusedDoseRows > 0) {
          // The patient's dose rows have errors of their own: the level cannot be judged until they are fixed.
          rowExcluded(e.sheet, e.row, `patient ${pat.id}'s dose rows have errors (see the problems), so this level cannot be placed yet`);
          continue;
        } else {
          evProblem(e, 'error', levelBeforeFirstDoseMessage(pat.id, where));
          rowExcluded(e.sheet, e.row, firstDose ? 'level before the first dose' : 'no dose for this patient');
          continue;
        }
      }
      timeline.push(e);
    }
    if (timeline.length === 0) continue;
    timelines.push(timeline);

    // Gaps that suggest a wrong date; clock changes; the skipped hour.
    for (let i = 1; i < timeline.length; i++) {
      const gapH = (timeline[i].t - timeline[i - 1].t) / (timeline[i].basis === 'wall' ? MS_H : 1);
      if (gapH > template.options.maxGapH) {
        const p = timeline[i - 1];
        evProblem(timeline[i], 'warning', `${(gapH / 24).toFixed(1)} days after the previous event of patient ${pat.id} (${p.sheet} row ${p.row}): a wrong date? Check both rows`);
      }
    }
    if (timeline[0].basis === 'wall' && template.options.clockChanges !== 'none') {
      const rule = template.options.clockChanges;
      for (const e of timeline) {
        const c = inSkippedHour(e.t, rule);
        if (c) evProblem(e, 'warning', `${wallMsToIso(e.t)} falls in the hour skipped when the clocks went forward on ${c.date} (${rule.toUpperCase()} rule): check the time`);
      }
      for (let i = 1; i < timeline.length; i++) {
        for (const c of clockChangesBetween(timeline[i - 1].t, timeline[i].t, rule)) {
          const e = timeline[i];
          evProblem(
            e,
            'warning',
            `the clocks went ${c.shiftH > 0 ? 'forward' : 'back'} on ${c.date} (${rule.toUpperCase()} rule) between ${timeline[i - 1].sheet} row ${timeline[i - 1].row} and this row: times are taken as written, so the real time since earlier events is 1 h ${c.shiftH > 0 ? 'shorter' : 'longer'} than the hours shown`,
          );
        }
      }
    }

    const t0 = timeline[0].basis === 'wall' ? timeline[0].t : 0;
    const doses: Dose[] = [];
    const observations: Observation[] = [];
    for (const e of timeline) {
      const timeH = e.basis === 'wall' ? (e.t - t0) / MS_H : e.t;
      if (timeH < 0) {
        evProblem(e, 'error', 'elapsed time is negative');
        rowExcluded(e.sheet, e.row, 'negative time');
        continue;
      }
      if (e.dose) {
        const d: Dose = { timeH, amountMg: e.dose.amountMg, route: e.dose.route, durationH: e.dose.durationH, sourceRow: e.row };
        if (e.dose.steadyStateIntervalH !== undefined) d.steadyStateIntervalH = e.dose.steadyStateIntervalH;
        doses.push(d);
      } else if (e.level) {
        const o: Observation = { timeH, valueMgL: e.level.valueMgL, censored: e.level.censored, sourceRow: e.row };
        if (e.level.lloqMgL !== undefined) o.lloqMgL = e.level.lloqMgL;
        observations.push(o);
      }
    }

    const covariates: Record<string, CovariateValue> = Object.create(null);
    if (pat.birthMs && timeline[0].basis === 'wall') {
      const ageY = (t0 - pat.birthMs.ms) / (365.25 * 24 * MS_H);
      if (ageY < 0) {
        problems.push({ sheet: pat.birthMs.sheet, row: pat.birthMs.row, column: pat.birthMs.column, value: wallMsToIso(pat.birthMs.ms).slice(0, 10), severity: 'error', message: `birth date is after patient ${pat.id}'s first event: check the date` });
      } else if (!pat.covariates.has(COVARIATE_NAMES.age)) {
        pat.covariates.set(COVARIATE_NAMES.age, { value: Math.round(ageY * 100) / 100, sheet: pat.birthMs.sheet, row: pat.birthMs.row, column: pat.birthMs.column });
        if (ageY > PLAUSIBLE.age[1])
          problems.push({ sheet: pat.birthMs.sheet, row: pat.birthMs.row, column: pat.birthMs.column, value: wallMsToIso(pat.birthMs.ms).slice(0, 10), severity: 'warning', message: `age ${ageY.toFixed(0)} years from the birth date is outside plausible human ages: check the birth date` });
      }
    }
    if (deriveCrcl) {
      const w = pat.covariates.get(COVARIATE_NAMES.weight)?.value;
      const a = pat.covariates.get(COVARIATE_NAMES.age)?.value;
      const sx = pat.covariates.get(COVARIATE_NAMES.sex)?.value;
      const scr = pat.covariates.get(COVARIATE_NAMES.creatinine);
      if (typeof w === 'number' && typeof a === 'number' && (sx === 'M' || sx === 'F') && scr && typeof scr.value === 'number') {
        const crcl = cockcroftGault({ ageY: a, weightKg: w, scrMgDl: scrUmolToMgDl(scr.value), sex: sx });
        if (Number.isFinite(crcl)) {
          pat.covariates.set(COVARIATE_NAMES.crcl, { value: Math.round(crcl * 100) / 100, sheet: scr.sheet, row: scr.row, column: scr.column });
          derivedCrcl++;
        } else problems.push({ sheet: scr.sheet, row: scr.row, column: scr.column, value: String(scr.value), severity: 'warning', message: `patient ${pat.id}: creatinine clearance cannot be derived (age ${a}, weight ${w} kg, creatinine ${scr.value} umol/L are outside the Cockcroft-Gault formula's domain)` });
      } else if (scr) crclMissing.push(pat.id);
    }
    for (const [name, entry] of pat.covariates) {
      covariates[name] = entry.value;
      if (!covNameSet.has(name)) {
        covNameSet.add(name);
        covNames.push(name);
      }
    }
    inputs.push({ id: pat.id, covariates, doses, observations });
  }

  // Covariates in the order of their columns in the file (derived ones last).
  const rank = covariateColumnRank(bound);
  const ordinal = new Map(covNames.map((n, i) => [n, i]));
  covNames.sort((a, b) => (rank.get(a) ?? Infinity) - (rank.get(b) ?? Infinity) || ordinal.get(a)! - ordinal.get(b)!);

  let dataset: Dataset | undefined;
  if (inputs.length > 0) {
    try {
      dataset = createDataset(inputs, covNames);
    } catch (e) {
      if (!(e instanceof DataError)) throw e;
      // Should not happen (every field is checked above); report rather than lose the rows.
      for (const p of e.problems) problems.push({ sheet: '', row: p.row ?? 0, column: p.field ?? '', value: '', severity: 'error', message: `${p.subject ? `patient ${p.subject}: ` : ''}${p.message}` });
      for (const tl of timelines) for (const ev of tl) rowExcluded(ev.sheet, ev.row, 'the dataset could not be built (see problems)');
    }
  } else {
    problems.push({ sheet: '', row: 0, column: '', value: '', severity: 'error', message: 'no usable dose or level rows: check the mapping (sheets, columns and roles) against the file' });
  }

  if (derivedCrcl > 0)
    notes.push(`${COVARIATE_NAMES.crcl} was derived for ${derivedCrcl} patient(s): ${COCKCROFT_GAULT_LABEL}, CrCl = (140 - age) x weight / (72 x SCr mg/dL), x 0.85 for women, with SCr umol/L / 88.4 = mg/dL (Cockcroft & Gault 1976); no CrCl column was given.`);
  if (crclMissing.length > 0)
    notes.push(`${COVARIATE_NAMES.crcl} was not derived for ${crclMissing.length} patient(s) with a creatinine but without weight, age (or birth date) and sex: ${crclMissing.slice(0, 10).join(', ')}${crclMissing.length > 10 ? ', ...' : ''}.`);
  const sheetOrder = new Map(model.sheets.map((s, i) => [s.name, i]));
  problems.sort((a, b) => (sheetOrder.get(a.sheet) ?? -1) - (sheetOrder.get(b.sheet) ?? -1) || a.row - b.row);
  excluded.sort((a, b) => (sheetOrder.get(a.sheet) ?? -1) - (sheetOrder.get(b.sheet) ?? -1) || a.row - b.row);
  const excludedKeys = new Set(excluded.map((x) => `${x.sheet}\u0000${x.row}`));

  let doses = 0;
  let levels = 0;
  let censored = 0;
  for (const s of dataset?.subjects ?? []) {
    doses += s.doses.length;
    levels += s.observations.length;
    for (const o of s.observations) if (o.censored) censored++;
  }
  const refreshed = refreshTemplate(template, bound);
  // Remember an order the file decided, so next month's export (maybe all ambiguous) reads the same way.
  if (dateOrder.order && refreshed.options.dateOrder === 'auto') refreshed.options = { ...refreshed.options, dateOrder: dateOrder.order };
  return {
    dataset,
    report: {
      mapping: refreshed,
      summary: { patients: dataset?.subjects.length ?? 0, doses, levels, censored, excludedRows: excludedKeys.size },
      problems,
      excluded,
      notes,
    },
  };
}

function firstError(problems: ReportProblem[], ctx: RowCtx): string {
  for (let i = problems.length - 1; i >= 0; i--) {
    const p = problems[i];
    if (p.sheet !== ctx.sheet || p.row !== ctx.row) break;
    if (p.severity === 'error') {
      let j = i;
      while (j > 0 && problems[j - 1].sheet === ctx.sheet && problems[j - 1].row === ctx.row && problems[j - 1].severity === 'error') j--;
      return problems[j].message;
    }
  }
  return 'row has errors';
}

function describeT(e: PendingEvent): string {
  return e.basis === 'wall' ? wallMsToIso(e.t) : `${e.t} h`;
}

type ProblemFn = (ctx: RowCtx, col: BoundColumn | undefined, severity: 'error' | 'warning', message: string, value?: string) => void;

interface DateOrderChoice {
  order: 'dayFirst' | 'monthFirst' | undefined;
  chosen: boolean;
}

const DATE_ROLES: readonly Role[] = ['dateTime', 'date', 'infusionStart', 'infusionEnd', 'birthDate'];

/**
 * Settle how d/m/y text dates are read. An explicit choice is used as it is (dates that do not
 * fit it are row errors). Under 'auto', the file decides when some date can only be read one way
 * (e.g. 31/03/2024), with a warning saying so; when every date fits both orders, no order is
 * chosen and each ambiguous date is a row error asking for --day-first or --month-first.
 */
function settleDateOrder(bound: readonly BoundSheet[], template: MappingTemplate, problems: ReportProblem[], notes: string[]): DateOrderChoice {
  const o = template.options.dateOrder;
  if (o !== 'auto') {
    notes.push(`Text dates are read ${o === 'dayFirst' ? 'day-first (31/03/2024)' : 'month-first (03/31/2024)'} as the mapping says.`);
    return { order: o, chosen: true };
  }
  let dayOnly: { sheet: string; row: number; label: string; text: string } | undefined;
  let monthOnly: typeof dayOnly;
  let either = 0;
  for (const b of bound)
    for (const role of DATE_ROLES) {
      const col = b.columns.get(role);
      if (!col) continue;
      for (let r = b.headerIndex + 1; r < b.sheet.rows.length; r++) {
        const cell = b.sheet.rows[r]?.[col.index];
        if (!cell || cell.kind !== 'text') continue;
        const p = parseDateCell(cell, 'auto');
        if (!p.ok) continue;
        if (p.value.order === 'dayFirstOnly' && !dayOnly) dayOnly = { sheet: b.sheet.name, row: r + 1, label: col.label, text: cell.text };
        else if (p.value.order === 'monthFirstOnly' && !monthOnly) monthOnly = { sheet: b.sheet.name, row: r + 1, label: col.label, text: cell.text };
        else if (p.value.order === 'either') either++;
      }
    }
  if (dayOnly && monthOnly) {
    problems.push({ sheet: monthOnly.sheet, row: monthOnly.row, column: monthOnly.label, value: monthOnly.text, severity: 'warning', message: `text dates are written both day-first ("${dayOnly.text}", ${dayOnly.sheet} row ${dayOnly.row}) and month-first ("${monthOnly.text}"): day-first is used and dates that do not fit it are errors; choose the order explicitly (--day-first / --month-first)` });
    notes.push('Text dates are read day-first; the file also has month-first dates (see problems).');
    return { order: 'dayFirst', chosen: false };
  }
  if (dayOnly) {
    if (either > 0) problems.push({ sheet: dayOnly.sheet, row: dayOnly.row, column: dayOnly.label, value: dayOnly.text, severity: 'warning', message: `text dates are read day-first because "${dayOnly.text}" can only be day-first; ${either} other date(s) would fit either order: confirm with --day-first` });
    notes.push('Text dates are read day-first (decided from the file).');
    return { order: 'dayFirst', chosen: false };
  }
  if (monthOnly) {
    if (either > 0) problems.push({ sheet: monthOnly.sheet, row: monthOnly.row, column: monthOnly.label, value: monthOnly.text, severity: 'warning', message: `text dates are read month-first because "${monthOnly.text}" can only be month-first; ${either} other date(s) would fit either order: confirm with --month-first` });
    notes.push('Text dates are read month-first (decided from the file).');
    return { order: 'monthFirst', chosen: false };
  }
  return { order: undefined, chosen: false };
}

function readDate(cell: Cell | undefined, order: DateOrderChoice, date1904: boolean): Parsed<WallTime> {
  const p = parseDateCell(cell, order.order ?? 'auto', date1904);
  if (p.ok && p.value.order === 'either' && order.order === undefined)
    return { ok: false, message: `"${cellText(cell)}" can be read day-first or month-first and nothing in the file decides it: choose --day-first or --month-first (dateOrder in the mapping)` };
  return p;
}

interface EventTime {
  t: number;
  basis: 'wall' | 'elapsed';
  column: string;
}

function readEventTime(b: BoundSheet, ctx: RowCtx, kind: 'dose' | 'level', problem: ProblemFn, order: DateOrderChoice, date1904: boolean): EventTime | undefined {
  const cells = ctx.cells;
  const cElapsed = b.columns.get('elapsedH');
  const cDateTime = b.columns.get('dateTime');
  const cDate = b.columns.get('date');
  const cTime = b.columns.get('time');
  const cStart = kind === 'dose' ? b.columns.get('infusionStart') : undefined;
  if (cElapsed && !isBlank(cells[cElapsed.index])) {
    const n = parseNumberCell(cells[cElapsed.index]);
    if (!n.ok) return void problem(ctx, cElapsed, 'error', `elapsed time: ${n.message}`);
    if (n.value < 0) return void problem(ctx, cElapsed, 'error', 'elapsed time is negative');
    const f = durationFactorToH(cElapsed.mapping.unit ?? 'h');
    const factor = f.ok ? f.value : 1;
    return { t: factor === 1 ? n.value : n.value * factor, basis: 'elapsed', column: cElapsed.label };
  }
  if (cDateTime && !isBlank(cells[cDateTime.index])) {
    const d = readDate(cells[cDateTime.index], order, date1904);
    if (!d.ok) return void problem(ctx, cDateTime, 'error', d.message);
    let ms = d.value.ms;
    if (!d.value.hasTime) {
      if (cTime && !isBlank(cells[cTime.index])) {
        const t = parseTimeCell(cells[cTime.index]);
        if (!t.ok) return void problem(ctx, cTime, 'error', t.message);
        ms += t.value;
      } else problem(ctx, cDateTime, 'warning', 'the date has no time of day: midnight (00:00) is used; export the time for usable levels');
    }
    return { t: ms, basis: 'wall', column: cDateTime.label };
  }
  if (cDate && !isBlank(cells[cDate.index])) {
    const d = readDate(cells[cDate.index], order, date1904);
    if (!d.ok) return void problem(ctx, cDate, 'error', d.message);
    const dayMs = Math.floor(d.value.ms / 86_400_000) * 86_400_000;
    if (!cTime || isBlank(cells[cTime?.index ?? -1])) {
      if (d.value.hasTime) return { t: d.value.ms, basis: 'wall', column: cDate.label };
      return void problem(ctx, cTime ?? cDate, 'error', `the ${kind} has a date but no time of day: fill in the time`);
    }
    const t = parseTimeCell(cells[cTime.index]);
    if (!t.ok) return void problem(ctx, cTime, 'error', t.message);
    return { t: dayMs + t.value, basis: 'wall', column: cTime.label };
  }
  if (cStart && !isBlank(cells[cStart.index])) {
    const d = readDate(cells[cStart.index], order, date1904);
    if (!d.ok) return void problem(ctx, cStart, 'error', d.message);
    return { t: d.value.ms, basis: 'wall', column: cStart.label };
  }
  const col = cDateTime ?? cDate ?? cElapsed ?? cStart;
  problem(ctx, col, 'error', `the ${kind} has no time: fill in the ${cDate ? 'date and time' : cElapsed ? 'elapsed hours' : 'date-time'}`);
  return undefined;
}

function unitOf(b: BoundSheet, ctx: RowCtx, unitRole: Role, valueCol: BoundColumn): { unit: string; col: BoundColumn | undefined } {
  const cu = b.columns.get(unitRole);
  if (cu && !isBlank(ctx.cells[cu.index])) return { unit: cellText(ctx.cells[cu.index]), col: cu };
  return { unit: valueCol.mapping.unit ?? '', col: cu ?? valueCol };
}

function readDose(
  b: BoundSheet,
  ctx: RowCtx,
  time: EventTime | undefined,
  problem: ProblemFn,
  order: DateOrderChoice,
  date1904: boolean,
  defaultRoute: Route | undefined,
): PendingEvent['dose'] | undefined {
  const cells = ctx.cells;
  const ca = b.columns.get('doseAmount');
  if (!ca) return void problem(ctx, undefined, 'error', 'no dose amount column is mapped');
  if (isBlank(cells[ca.index])) return void problem(ctx, ca, 'error', 'the dose amount is empty');
  const n = parseNumberCell(cells[ca.index]);
  if (!n.ok) return void problem(ctx, ca, 'error', `dose amount: ${n.message}`);
  if (n.value < 0) return void problem(ctx, ca, 'error', 'the dose amount is negative');
  if (n.value === 0) return void problem(ctx, ca, 'error', 'the dose amount is 0: delete the row if the dose was not given');
  const u = unitOf(b, ctx, 'doseUnit', ca);
  const f = doseFactorToMg(u.unit);
  if (!f.ok) return void problem(ctx, u.col, 'error', f.message, u.unit);
  const amountMg = n.value * f.value;

  let durationH: number | undefined;
  const cDur = b.columns.get('infusionDuration');
  const cEnd = b.columns.get('infusionEnd');
  const cRate = b.columns.get('infusionRate');
  if (cDur && !isBlank(cells[cDur.index])) {
    const d = parseNumberCell(cells[cDur.index]);
    const fu = durationFactorToH(cDur.mapping.unit ?? 'h');
    if (!d.ok) return void problem(ctx, cDur, 'error', `infusion duration: ${d.message}`);
    if (!fu.ok) return void problem(ctx, cDur, 'error', fu.message, cDur.mapping.unit);
    if (d.value < 0) return void problem(ctx, cDur, 'error', 'the infusion duration is negative');
    durationH = d.value * fu.value;
    if (durationH > 48) problem(ctx, cDur, 'warning', `infusion duration ${durationH} h is unusually long: is the unit minutes?`);
  } else if (cEnd && !isBlank(cells[cEnd.index]) && time && time.basis === 'wall') {
    const cell = cells[cEnd.index];
    let endMs: number | undefined;
    const asDate = cell && (cell.kind === 'date' || cell.kind === 'text') ? readDate(cell, order, date1904) : undefined;
    if (asDate && asDate.ok && !(cell!.kind === 'date' && (cell!.raw as number) < 1)) endMs = asDate.value.ms;
    else {
      const t = parseTimeCell(cell);
      if (!t.ok) return void problem(ctx, cEnd, 'error', `infusion end: ${asDate && !asDate.ok ? asDate.message : t.message}`);
      endMs = Math.floor(time.t / 86_400_000) * 86_400_000 + t.value;
      if (endMs <= time.t) {
        endMs += 86_400_000;
        problem(ctx, cEnd, 'warning', 'the infusion end (a time of day only) is before the start: taken as the next day');
      }
    }
    if (endMs <= time.t) return void problem(ctx, cEnd, 'error', `the infusion ends (${wallMsToIso(endMs)}) before or when it starts (${wallMsToIso(time.t)}): check both times`);
    durationH = (endMs - time.t) / MS_H;
  } else if (cRate && !isBlank(cells[cRate.index])) {
    const r = parseNumberCell(cells[cRate.index]);
    const fu = rateFactorToMgPerH(cRate.mapping.unit ?? 'mg/h');
    if (!r.ok) return void problem(ctx, cRate, 'error', `infusion rate: ${r.message}`);
    if (!fu.ok) return void problem(ctx, cRate, 'error', fu.message, cRate.mapping.unit);
    if (!(r.value > 0)) return void problem(ctx, cRate, 'error', 'the infusion rate must be > 0');
    durationH = amountMg / (r.value * fu.value);
  }

  let route: Route | undefined;
  const cr = b.columns.get('route');
  if (cr && !isBlank(cells[cr.index])) {
    route = parseRoute(cellText(cells[cr.index]));
    if (!route) return void problem(ctx, cr, 'error', `route "${cellText(cells[cr.index])}" is not known: use e.g. IV infusion, IV bolus or oral`);
  }
  if (route === undefined) route = durationH !== undefined && durationH > 0 ? 'infusion' : defaultRoute;
  if (route === undefined) return void problem(ctx, cr, 'error', 'the route is missing: give the route of such doses with --default-route bolus|infusion|oral (plateau check, then --save-mapping), or map a route column');
  if (route === 'bolus' && durationH !== undefined && durationH > 0) route = 'infusion'; // "IV" given over a stated time
  if (route === 'oral' && durationH !== undefined && durationH > 0) return void problem(ctx, cr, 'error', 'an oral dose has an infusion duration: check the route');
  if (route === 'infusion' && !(durationH !== undefined && durationH > 0))
    return void problem(ctx, cDur ?? cEnd ?? cRate ?? cr, 'error', 'the infusion has no duration (or 0): fill in the duration, the end time or the rate');

  const out: NonNullable<PendingEvent['dose']> = { amountMg, route, durationH: route === 'infusion' ? durationH! : 0 };
  const cSs = b.columns.get('steadyStateInterval');
  if (cSs && !isBlank(cells[cSs.index])) {
    const s = parseNumberCell(cells[cSs.index]);
    if (!s.ok || !(s.value > 0)) return void problem(ctx, cSs, 'error', 'the steady-state interval must be a number of hours > 0');
    out.steadyStateIntervalH = s.value;
  }
  return out;
}

function readLevel(
  b: BoundSheet,
  ctx: RowCtx,
  problem: ProblemFn,
  molarMass: number | undefined,
  defaultLloqMgL: number | undefined,
  sep: MappingTemplate['options']['decimalSeparator'],
): PendingEvent['level'] | undefined {
  const cells = ctx.cells;
  const cv = b.columns.get('levelValue');
  if (!cv) return void problem(ctx, undefined, 'error', 'no level column is mapped');
  if (isBlank(cells[cv.index])) return void problem(ctx, cv, 'error', 'the level is empty: fill it in, or mark the sample in the comment (e.g. not received)');
  const v = parseLevelCell(cells[cv.index], sep);
  if (!v.ok) return void problem(ctx, cv, 'error', v.message);
  const u = unitOf(b, ctx, 'levelUnit', cv);
  const f = levelFactorToMgL(u.unit, molarMass);
  if (!f.ok) return void problem(ctx, u.col, 'error', f.message, u.unit);
  let lloqMgL: number | undefined;
  const cl = b.columns.get('lloq');
  if (cl && !isBlank(cells[cl.index])) {
    const raw = cellText(cells[cl.index]).replace(/^<\s*/, '');
    const l = parseNumberCell({ kind: 'text', raw, text: raw }, sep);
    if (!l.ok || !(l.value > 0)) return void problem(ctx, cl, 'error', `the LLOQ must be a number > 0${l.ok ? '' : ` (${l.message})`}`);
    const lu = cl.mapping.unit ? levelFactorToMgL(cl.mapping.unit, molarMass) : f;
    if (!lu.ok) return void problem(ctx, cl, 'error', lu.message, cl.mapping.unit);
    lloqMgL = l.value * lu.value;
  }
  const cf = b.columns.get('censoredFlag');
  let flag: boolean | undefined;
  if (cf && !isBlank(cells[cf.index])) {
    const pf = parseCensoredFlag(cellText(cells[cf.index]));
    if (!pf.ok) return void problem(ctx, cf, 'error', pf.message);
    flag = pf.value;
  }
  if (flag === true && v.value.kind === 'value') {
    // A flag column (canonical CSV style): the level is below the LLOQ; the limit is the LLOQ column or the value.
    const limit = lloqMgL ?? v.value.value * f.value;
    if (!(limit > 0)) return void problem(ctx, cf, 'error', 'a censored level needs its LLOQ (> 0): fill in the LLOQ column');
    return { valueMgL: limit, censored: true, lloqMgL: limit };
  }
  if (v.value.kind === 'censored') {
    const disagree = censoredDisagreement(v.value.limit !== undefined ? v.value.limit * f.value : undefined, flag, lloqMgL);
    if (disagree?.severity === 'error') return void problem(ctx, cv, 'error', disagree.message);
    if (disagree) problem(ctx, cv, 'warning', disagree.message);
    const limit = v.value.limit !== undefined ? v.value.limit * f.value : (lloqMgL ?? defaultLloqMgL);
    if (limit === undefined) return void problem(ctx, cv, 'error', `"${v.value.text}" is below the limit, but no limit is known: give the LLOQ with --lloq <mg/L> (plateau check, then --save-mapping), or add an LLOQ column`);
    if (!(limit > 0)) return void problem(ctx, cv, 'error', `the stated limit in "${v.value.text}" must be > 0`);
    return { valueMgL: limit, censored: true, lloqMgL: limit };
  }
  if (v.value.value < 0) return void problem(ctx, cv, 'error', 'the level is negative');
  if (v.value.value === 0) problem(ctx, cv, 'warning', 'the level is 0: if it was below the LLOQ, report it as "<LLOQ" so it is treated as censored');
  const out: NonNullable<PendingEvent['level']> = { valueMgL: v.value.value * f.value, censored: false };
  if (lloqMgL !== undefined) out.lloqMgL = lloqMgL;
  return out;
}

function readCovariates(b: BoundSheet, ctx: RowCtx, pat: PatientAcc, problem: ProblemFn, order: DateOrderChoice, date1904: boolean): void {
  const cells = ctx.cells;
  const setCov = (name: string, value: CovariateValue, col: BoundColumn, conflictIsError: boolean) => {
    const prev = pat.covariates.get(name);
    if (!prev) {
      pat.covariates.set(name, { value, sheet: ctx.sheet, row: ctx.row, column: col.label });
      return;
    }
    if (prev.value === value) return;
    if (conflictIsError) {
      problem(ctx, col, 'error', `patient ${pat.id} has ${name} ${prev.value} in ${prev.sheet} row ${prev.row} and ${value} here: one patient cannot have two; correct the wrong row`);
    } else if (!pat.covariateWarned.has(name)) {
      pat.covariateWarned.add(name);
      problem(ctx, col, 'warning', `patient ${pat.id}'s ${name} changes (${prev.value} in ${prev.sheet} row ${prev.row}, ${value} here): covariates are constant per patient, the first value is used`);
    }
  };
  const numeric = (role: 'weight' | 'height' | 'age' | 'creatinine', unitLabel: string, factorOf: (u: string) => Parsed<number>, unitRole?: Role) => {
    const name = COVARIATE_NAMES[role];
    const range = PLAUSIBLE[role];
    const col = b.columns.get(role);
    if (!col || isBlank(cells[col.index])) return;
    const n = parseNumberCell(cells[col.index]);
    if (!n.ok) return problem(ctx, col, 'error', `${role}: ${n.message}`);
    if (n.value < 0) return problem(ctx, col, 'error', `${role} is negative`);
    const unit = unitRole ? unitOf(b, ctx, unitRole, col) : { unit: col.mapping.unit ?? '', col };
    const f = factorOf(unit.unit);
    if (!f.ok) return problem(ctx, unit.col, 'error', f.message, unit.unit);
    const value = Math.round(n.value * f.value * 1e6) / 1e6;
    if (value < range[0] || value > range[1])
      problem(ctx, col, 'warning', `${role} ${value} ${unitLabel} is outside the plausible human range ${range[0]}-${range[1]}: check the value and its unit`);
    setCov(col.mapping.name ?? name, value, col, false);
  };
  numeric('weight', 'kg', weightFactorToKg);
  numeric('height', 'cm', heightFactorToCm);
  numeric('age', 'years', ageFactorToYears);
  numeric('creatinine', 'umol/L', (u) => (u === '' ? { ok: false, message: 'the creatinine unit is missing: write it in the column header, e.g. "Creatinine (umol/L)" or "(mg/dL)", or add a unit column' } : creatinineFactorToUmolL(u)), 'creatinineUnit');

  const cs = b.columns.get('sex');
  if (cs && !isBlank(cells[cs.index])) {
    const s = parseSex(cellText(cells[cs.index]));
    if (!s) problem(ctx, cs, 'warning', `sex "${cellText(cells[cs.index])}" is not recognised (F/M): left out`);
    else setCov(cs.mapping.name ?? COVARIATE_NAMES.sex, s, cs, true);
  }
  const cb = b.columns.get('birthDate');
  if (cb && !isBlank(cells[cb.index])) {
    const d = readDate(cells[cb.index], order, date1904);
    if (!d.ok) problem(ctx, cb, 'error', `birth date: ${d.message}`);
    else if (!pat.birthMs) pat.birthMs = { value: d.value.ms, ms: d.value.ms, sheet: ctx.sheet, row: ctx.row, column: cb.label };
    else if (Math.abs(pat.birthMs.ms - d.value.ms) >= 86_400_000)
      problem(ctx, cb, 'error', `patient ${pat.id} has birth date ${wallMsToIso(pat.birthMs.ms).slice(0, 10)} in ${pat.birthMs.sheet} row ${pat.birthMs.row} and ${wallMsToIso(d.value.ms).slice(0, 10)} here: correct the wrong row`);
  }
  for (const col of b.covariates) {
    if (isBlank(cells[col.index])) continue;
    const cell = cells[col.index];
    const name = col.mapping.name ?? col.mapping.header;
    if (!name) continue;
    const n = parseNumberCell(cell);
    setCov(name, n.ok ? n.value : cellText(cell).slice(0, 200), col, false);
  }
}

/** Age units to years (a month is 1/12 year; a week 7 and a day 1 of 365.25 days, common practice). */
function ageFactorToYears(unit: string): Parsed<number> {
  const u = unit.trim().toLowerCase();
  if (u === '' || /^(y|yr|yrs|year|years|jahre|ans|jaar|a)$/.test(u)) return { ok: true, value: 1 };
  if (/^(mo|mon|month|months|monate|mois|maanden)$/.test(u)) return { ok: true, value: 1 / 12 };
  if (/^(w|wk|wks|week|weeks|wochen|semaines)$/.test(u)) return { ok: true, value: 7 / 365.25 };
  if (/^(d|day|days|tage|jours|dagen)$/.test(u)) return { ok: true, value: 1 / 365.25 };
  return { ok: false, message: `unknown age unit "${unit}" (years, months, weeks or days): write the unit in the column header, e.g. "Age (years)"` };
}

/** Columns of a bound sheet that are not imported, each named with the reason (nothing is left out silently). */
function ignoredColumnNotes(b: BoundSheet): string[] {
  const out: string[] = [];
  const header = b.sheet.rows[b.headerIndex] ?? [];
  const used = new Set<number>([...b.columns.values(), ...b.covariates].map((c) => c.index));
  const unitRoles = new Set<number>();
  for (const r of ['doseUnit', 'levelUnit', 'creatinineUnit'] as const) {
    const c = b.columns.get(r);
    if (c) unitRoles.add(c.index);
  }
  const noteByHeader = new Map<string, string>();
  for (const c of b.mapping.columns) if (c.role === 'ignore' && c.note) noteByHeader.set(c.header.trim(), c.note);
  for (let i = 0; i < header.length; i++) {
    if (used.has(i) || unitRoles.has(i)) continue;
    const text = header[i]?.text.trim() ?? '';
    let hasValue = false;
    for (let r = b.headerIndex + 1; r < b.sheet.rows.length && !hasValue; r++) if (!isBlank(b.sheet.rows[r]?.[i])) hasValue = true;
    if (text === '' && !hasValue) continue;
    const why = noteByHeader.get(text) ?? (b.mapping.columns.some((c) => c.header.trim() === text) ? 'mapped as ignore' : 'not in the mapping');
    out.push(`Sheet "${b.sheet.name}", column ${columnLabel(i, text)} is not imported: ${why}${hasValue ? '' : ' (no values)'}.`);
  }
  return out;
}

const STANDARD_COVARIATE_ROLE: Partial<Record<Role, string>> = {
  weight: COVARIATE_NAMES.weight,
  height: COVARIATE_NAMES.height,
  age: COVARIATE_NAMES.age,
  birthDate: COVARIATE_NAMES.age,
  creatinine: COVARIATE_NAMES.creatinine,
  sex: COVARIATE_NAMES.sex,
};

function covariateColumnRank(bound: readonly BoundSheet[]): Map<string, number> {
  const rank = new Map<string, number>();
  bound.forEach((b, bi) => {
    const cols: [number, string][] = [];
    for (const [role, c] of b.columns) {
      const std = STANDARD_COVARIATE_ROLE[role];
      if (std) cols.push([c.index, role === 'birthDate' ? std : (c.mapping.name ?? std)]);
    }
    for (const c of b.covariates) cols.push([c.index, c.mapping.name ?? c.mapping.header]);
    for (const [i, name] of cols) if (!rank.has(name)) rank.set(name, bi * 1e6 + i);
  });
  return rank;
}
