/**
 * patient.json: one patient's covariates, actual dose history and measured levels (README,
 * "patient.json"). Parsed and checked here; every problem names its JSON path and what to do.
 * Times are hours from the first dose; ISO local clock times ("2026-03-01T08:00") are accepted
 * instead and converted. Units are carried in the key names (amount_mg, conc_mg_L, scr_umol_L).
 */
import type { CovariateValue, Dose, Observation } from '../data/types.js';
import { nearestKey, unknownKeyProblems } from '../json/knownKeys.js';
import { wrongKindMessage } from '../spec/fileKind.js';
import { COCKCROFT_GAULT_LABEL, cockcroftGault, scrUmolToMgDl, UMOL_L_PER_MG_DL, type Sex } from './renal.js';

export interface PatientNote {
  severity: 'note' | 'flag';
  code: string;
  message: string;
}

/** Serum creatinine measured at a time (for the renal-change check). */
export interface RenalRecord {
  timeH: number;
  scrMgDl: number;
}

export interface Patient {
  id: string;
  /** Null-prototype record: given covariates with canonical names, plus derived crcl_mL_min. */
  covariates: Record<string, CovariateValue>;
  /** Which covariates were derived, and how (name -> text). */
  derived: Record<string, string>;
  /** Sorted by time, h from the first dose. */
  doses: Dose[];
  /** Sorted by time. */
  levels: Observation[];
  /** What each level was meant to be ("trough", "peak"), aligned with `levels`; for timing checks. */
  levelKinds: Array<LevelKind | undefined>;
  renal: RenalRecord[];
  /** Clock time of t = 0 when clock times were given (ISO local, no zone). */
  clockOrigin?: string;
  /** Time (h) the next dose can start; default: one usual interval after the last dose, or now. */
  nextDoseH?: number;
  notes: PatientNote[];
}

export type LevelKind = 'trough' | 'peak';

export class PatientError extends Error {
  readonly problems: readonly string[];
  constructor(problems: readonly string[]) {
    super(`invalid patient file:\n${problems.map((p) => `  ${p}`).join('\n')}`);
    this.name = 'PatientError';
    this.problems = problems;
  }
}

const isRecord = (x: unknown): x is Record<string, unknown> => typeof x === 'object' && x !== null && !Array.isArray(x);
const finite = (x: unknown): x is number => typeof x === 'number' && Number.isFinite(x);

/** Canonical covariates with their accepted units; an unlisted unit of the same quantity is an error. */
const QUANTITY_KEYS: Record<string, { canonical: string; factor: number; min: number; max: number }> = {
  weight_kg: { canonical: 'weight_kg', factor: 1, min: 0.3, max: 400 },
  height_cm: { canonical: 'height_cm', factor: 1, min: 20, max: 260 },
  age_y: { canonical: 'age_y', factor: 1, min: 0, max: 120 },
  scr_mg_dL: { canonical: 'scr_mg_dL', factor: 1, min: 0.05, max: 25 },
  scr_umol_L: { canonical: 'scr_mg_dL', factor: 1 / UMOL_L_PER_MG_DL, min: 4, max: 2200 },
  crcl_mL_min: { canonical: 'crcl_mL_min', factor: 1, min: 0, max: 400 },
};
/** Key prefixes of known quantities: weight_lb or scr_mmol_L is an unknown unit, not a new covariate. */
const QUANTITY_PREFIXES = ['weight', 'height', 'age', 'scr', 'crcl', 'creatinine'];

/** Parse an ISO local date-time "YYYY-MM-DDTHH:MM[:SS]" (or with a space) to minutes since 1970, zone-free. */
export function parseLocalClock(text: string): number | undefined {
  const m = /^(\d{4})-(\d{2})-(\d{2})[T ](\d{2}):(\d{2})(?::(\d{2}))?$/.exec(text.trim());
  if (!m) return undefined;
  const [y, mo, d, h, mi, s] = [m[1], m[2], m[3], m[4], m[5], m[6] ?? '0'].map(Number);
  if (mo < 1 || mo > 12 || d < 1 || d > 31 || h > 23 || mi > 59 || s > 59) return undefined;
  const ms = Date.UTC(y, mo - 1, d, h, mi, s);
  const back = new Date(ms);
  if (back.getUTCDate() !== d || back.getUTCMonth() !== mo - 1) return undefined;
  return ms / 60000;
}

/** Every key patient.json may have, at each level (unknown keys are errors naming the nearest). */
export const PATIENT_KEYS = ['id', 'covariates', 'doses', 'levels', 'renal', 'next_dose_h', 'next_dose'] as const;
export const DOSE_KEYS = ['time_h', 'time', 'amount_mg', 'amount_g', 'duration_h', 'duration_min', 'route', 'ss_interval_h'] as const;
export const LEVEL_KEYS = ['time_h', 'time', 'conc_mg_L', 'conc_ug_mL', 'conc_ng_mL', 'censored', 'lloq_mg_L', 'kind'] as const;
export const RENAL_KEYS = ['time_h', 'time', 'scr_mg_dL', 'scr_umol_L'] as const;
/** Covariate names with a known meaning; another covariate may be any name the model uses. */
export const CANONICAL_COVARIATES = ['weight_kg', 'height_cm', 'age_y', 'sex', 'scr_mg_dL', 'scr_umol_L', 'crcl_mL_min'] as const;

/** Bounds on times (common practice, wide): beyond them a value is a unit or typing error. */
const MAX_TIME_H = 35_000;
const MAX_INFUSION_H = 720;
const MAX_NEXT_DOSE_DELAY_H = 720;

interface TimeSpec {
  mode: 'hours' | 'clock' | undefined;
  originMin: number;
}

/**
 * Parse patient.json (already JSON-parsed). Throws PatientError listing every problem; returns
 * the patient with notes and flags for things that are odd but not impossible.
 */
export function parsePatient(json: unknown): Patient {
  const problems: string[] = [];
  const notes: PatientNote[] = [];
  if (!isRecord(json)) throw new PatientError(['the patient file must be a JSON object {id, covariates, doses, levels}']);
  const wrong = json.doses === undefined ? wrongKindMessage(json, ['patient file']) : undefined;
  if (wrong) throw new PatientError([`${wrong}: give patient.json (id, covariates, doses, levels)`]);
  problems.push(...unknownKeyProblems(json, PATIENT_KEYS));

  const id = typeof json.id === 'string' && json.id.trim() ? json.id.trim() : typeof json.id === 'number' ? String(json.id) : '';
  if (!id) problems.push('id: give the patient an identifier (text)');

  // Times: all hours (time_h) or all clock (time); mixing is ambiguous.
  const rawDoses = Array.isArray(json.doses) ? json.doses : [];
  const rawLevels = json.levels === undefined ? [] : Array.isArray(json.levels) ? json.levels : null;
  const rawRenal = json.renal === undefined ? [] : Array.isArray(json.renal) ? json.renal : null;
  if (!Array.isArray(json.doses)) problems.push('doses: must be a list of {time_h, amount_mg, duration_h, route}');
  else if (json.doses.length === 0) problems.push('doses: the dose history is empty; give at least the first dose (levels and forecasts are timed from it)');
  if (rawLevels === null) problems.push('levels: must be a list of {time_h, conc_mg_L, censored}');
  if (rawRenal === null) problems.push('renal: must be a list of {time_h, scr_mg_dL | scr_umol_L}');

  const timed: Array<{ at: string; r: Record<string, unknown> }> = [];
  rawDoses.forEach((r, i) => isRecord(r) && timed.push({ at: `doses[${i}]`, r }) && problems.push(...unknownKeyProblems(r, DOSE_KEYS, `doses[${i}]`)));
  (rawLevels ?? []).forEach((r, i) => isRecord(r) && timed.push({ at: `levels[${i}]`, r }) && problems.push(...unknownKeyProblems(r, LEVEL_KEYS, `levels[${i}]`)));
  (rawRenal ?? []).forEach((r, i) => isRecord(r) && timed.push({ at: `renal[${i}]`, r }) && problems.push(...unknownKeyProblems(r, RENAL_KEYS, `renal[${i}]`)));
  const time: TimeSpec = { mode: undefined, originMin: 0 };
  let clockOrigin: string | undefined;
  const hasH = timed.some((t) => t.r.time_h !== undefined);
  const hasClock = timed.some((t) => t.r.time !== undefined);
  if (hasH && hasClock) problems.push('times: use either time_h (hours from the first dose) or time (clock) throughout the file, not both');
  else if (hasClock) {
    time.mode = 'clock';
    let first = Infinity;
    rawDoses.forEach((r) => {
      if (isRecord(r) && typeof r.time === 'string') {
        const m = parseLocalClock(r.time);
        if (m !== undefined && m < first) {
          first = m;
          clockOrigin = r.time.trim();
        }
      }
    });
    time.originMin = first;
  } else time.mode = 'hours';

  const readTime = (r: Record<string, unknown>, at: string): number => {
    if (time.mode === 'clock') {
      if (typeof r.time !== 'string') {
        problems.push(`${at}.time: give the clock time as "YYYY-MM-DDTHH:MM" (local time)`);
        return NaN;
      }
      if (/[zZ]$|[+-]\d{2}:?\d{2}$/.test(r.time.trim())) {
        problems.push(`${at}.time: "${r.time}" has a time zone; give ward local clock time without one ("YYYY-MM-DDTHH:MM")`);
        return NaN;
      }
      const m = parseLocalClock(r.time);
      if (m === undefined) {
        problems.push(`${at}.time: "${r.time}" is not a date-time "YYYY-MM-DDTHH:MM[:SS]"`);
        return NaN;
      }
      return (m - time.originMin) / 60;
    }
    if (!finite(r.time_h)) {
      problems.push(`${at}.time_h: must be a number of hours from the first dose`);
      return NaN;
    }
    if (Math.abs(r.time_h) > MAX_TIME_H) {
      problems.push(`${at}.time_h: ${r.time_h} h is implausible (more than ${MAX_TIME_H} h, about 4 years, from the first dose); check the unit (hours expected)`);
      return NaN;
    }
    return r.time_h;
  };

  // Doses
  const doses: Dose[] = [];
  rawDoses.forEach((r, i) => {
    const at = `doses[${i}]`;
    if (!isRecord(r)) return void problems.push(`${at}: must be an object {time_h, amount_mg, duration_h, route}`);
    const t = readTime(r, at);
    let amount = NaN;
    if (finite(r.amount_mg)) amount = r.amount_mg;
    else if (finite(r.amount_g)) amount = r.amount_g * 1000;
    else {
      const other = Object.keys(r).find((k) => k.startsWith('amount'));
      problems.push(other && other !== 'amount_mg' ? `${at}.${other}: unknown unit; give amount_mg (or amount_g)` : `${at}.amount_mg: the dose amount (mg) is missing`);
    }
    if (finite(amount) && !(amount > 0)) problems.push(`${at}.amount_mg: must be > 0, got ${amount}`);
    else if (amount > 100_000) problems.push(`${at}.amount_mg: ${amount} mg is implausible for one dose; check the unit (mg expected)`);
    const routeRaw = r.route === undefined ? 'iv' : r.route;
    const durationRaw = r.duration_h === undefined ? (r.duration_min !== undefined && finite(r.duration_min) ? r.duration_min / 60 : 0) : r.duration_h;
    if (!finite(durationRaw) || durationRaw < 0) problems.push(`${at}.duration_h: must be a number of hours >= 0`);
    else if (durationRaw > MAX_INFUSION_H) problems.push(`${at}.duration_h: ${durationRaw} h is implausible for one infusion (at most ${MAX_INFUSION_H} h); record a long continuous infusion as consecutive infusions, or check the unit`);
    let route: Dose['route'] = 'bolus';
    const duration = finite(durationRaw) && durationRaw > 0 ? durationRaw : 0;
    if (routeRaw === 'iv' || routeRaw === 'infusion' || routeRaw === 'bolus') route = duration > 0 ? 'infusion' : 'bolus';
    else if (routeRaw === 'oral') route = 'oral';
    else problems.push(`${at}.route: unknown route ${JSON.stringify(routeRaw)} (iv, infusion, bolus or oral)`);
    if (routeRaw === 'bolus' && duration > 0) problems.push(`${at}: a bolus has no duration; use route "iv" with duration_h for an infusion`);
    if (route === 'oral' && duration > 0) problems.push(`${at}: an oral dose has no duration`);
    if (duration > 48) notes.push({ severity: 'flag', code: 'long-infusion', message: `${at}: an infusion of ${duration} h is unusual; check duration_h is in hours` });
    const dose: Dose = { timeH: t, amountMg: amount, route, durationH: route === 'infusion' ? duration : 0, sourceRow: i + 1 };
    if (r.ss_interval_h !== undefined) {
      if (!(finite(r.ss_interval_h) && r.ss_interval_h > 0 && r.ss_interval_h <= 168)) problems.push(`${at}.ss_interval_h: must be the dosing interval in hours, > 0 and at most 168`);
      else if (i !== 0) problems.push(`${at}.ss_interval_h: only the first dose of the history can be marked as given at steady state`);
      else dose.steadyStateIntervalH = r.ss_interval_h;
    }
    doses.push(dose);
  });
  const doseOrder = doses.map((d, i) => ({ d, i })).sort((x, y) => x.d.timeH - y.d.timeH || x.i - y.i);
  doses.length = 0;
  for (const { d } of doseOrder) doses.push(d);
  for (let i = 0; i < doses.length; i++) {
    const d = doses[i];
    if (finite(d.timeH) && d.timeH < 0) problems.push(`doses[${(d.sourceRow ?? 0) - 1}].time_h: must be >= 0 (hours from the first dose)`);
    if (i === 0) continue;
    const p = doses[i - 1];
    if (d.timeH === p.timeH) problems.push(`doses[${(d.sourceRow ?? 0) - 1}]: given at the same time as doses[${(p.sourceRow ?? 0) - 1}]; merge them into one dose or correct the time`);
    else if (p.timeH + p.durationH > d.timeH + 1e-9)
      problems.push(`doses[${(d.sourceRow ?? 0) - 1}]: starts at ${fmtH(d.timeH)} while the infusion of doses[${(p.sourceRow ?? 0) - 1}] runs until ${fmtH(p.timeH + p.durationH)}; overlapping infusions are not accepted, check the times and durations`);
  }
  const firstDoseH = doses.length ? doses[0].timeH : 0;
  if (doses.length && time.mode === 'hours' && firstDoseH !== 0 && finite(firstDoseH))
    notes.push({ severity: 'note', code: 'time-origin', message: `the first dose is at ${fmtH(firstDoseH)}; times are used as given` });

  // Levels
  const levels: Observation[] = [];
  const kindByRow = new Map<number, LevelKind>();
  (rawLevels ?? []).forEach((r, i) => {
    const at = `levels[${i}]`;
    if (!isRecord(r)) return void problems.push(`${at}: must be an object {time_h, conc_mg_L, censored}`);
    if (r.kind !== undefined) {
      if (r.kind === 'trough' || r.kind === 'peak') kindByRow.set(i + 1, r.kind);
      else if (r.kind !== 'random') problems.push(`${at}.kind: must be "trough", "peak" or "random"`);
    }
    const t = readTime(r, at);
    let conc = NaN;
    if (finite(r.conc_mg_L)) conc = r.conc_mg_L;
    else if (finite(r.conc_ug_mL)) conc = r.conc_ug_mL;
    else if (finite(r.conc_ng_mL)) conc = r.conc_ng_mL / 1000;
    const censored = r.censored ?? false;
    if (typeof censored !== 'boolean') problems.push(`${at}.censored: must be true or false`);
    const lloq = r.lloq_mg_L;
    if (lloq !== undefined && !(finite(lloq) && lloq > 0)) problems.push(`${at}.lloq_mg_L: must be a number > 0`);
    if (!finite(conc)) {
      const other = Object.keys(r).find((k) => k.startsWith('conc'));
      const given = ['conc_mg_L', 'conc_ug_mL', 'conc_ng_mL'].find((k) => r[k] !== undefined && r[k] !== null && r[k] !== '');
      if (censored === true && finite(lloq)) conc = lloq;
      else if (given) problems.push(`${at}.${given}: must be a number, got ${JSON.stringify(r[given])} (not a number); give the measured level, or mark it censored with lloq_mg_L`);
      else if (other && !['conc_mg_L', 'conc_ug_mL', 'conc_ng_mL'].includes(other)) problems.push(`${at}.${other}: unknown unit; give conc_mg_L (mg/L = ug/mL) or conc_ng_mL`);
      else problems.push(`${at}.conc_mg_L: the measured level (mg/L) is missing`);
    } else if (conc < 0) problems.push(`${at}.conc_mg_L: a level cannot be negative`);
    else if (conc > 2000) problems.push(`${at}.conc_mg_L: ${conc} mg/L is implausible; check the unit (mg/L expected)`);
    if (censored === true) {
      const l = finite(lloq) ? lloq : conc;
      if (!(l > 0)) problems.push(`${at}: a level below the LLOQ needs lloq_mg_L (> 0)`);
      levels.push({ timeH: t, valueMgL: l, censored: true, lloqMgL: l, sourceRow: i + 1 });
    } else {
      if (finite(lloq) && finite(conc) && conc < lloq) notes.push({ severity: 'flag', code: 'below-lloq-uncensored', message: `${at}: ${conc} mg/L is below its LLOQ ${lloq} mg/L but not marked censored; it is used as measured` });
      levels.push({ timeH: t, valueMgL: conc, censored: false, ...(finite(lloq) ? { lloqMgL: lloq } : {}), sourceRow: i + 1 });
    }
  });
  levels.sort((x, y) => x.timeH - y.timeH);
  const levelKinds = levels.map((o) => kindByRow.get(o.sourceRow ?? 0));
  for (const o of levels) {
    const at = `levels[${(o.sourceRow ?? 0) - 1}]`;
    // A level at the first dose's own time is pre-dose (model convention), so before any dose too.
    if (finite(o.timeH) && doses.length && o.timeH <= firstDoseH && !doses[0].steadyStateIntervalH)
      problems.push(`${at}: drawn at ${fmtH(o.timeH)}, ${o.timeH === firstDoseH ? 'at the time of the first dose (taken as before it)' : 'before the first dose'} (${fmtH(firstDoseH)}); add the earlier doses or check the time`);
  }

  // Renal history
  const renal: RenalRecord[] = [];
  (rawRenal ?? []).forEach((r, i) => {
    const at = `renal[${i}]`;
    if (!isRecord(r)) return void problems.push(`${at}: must be an object {time_h, scr_mg_dL | scr_umol_L}`);
    const t = readTime(r, at);
    const scr = finite(r.scr_mg_dL) ? r.scr_mg_dL : finite(r.scr_umol_L) ? scrUmolToMgDl(r.scr_umol_L) : NaN;
    if (!(scr > 0)) problems.push(`${at}: give scr_mg_dL or scr_umol_L (> 0)`);
    renal.push({ timeH: t, scrMgDl: scr });
  });
  renal.sort((x, y) => x.timeH - y.timeH);

  // Covariates
  const covariates: Record<string, CovariateValue> = Object.create(null);
  const derived: Record<string, string> = Object.create(null);
  if (json.covariates !== undefined && !isRecord(json.covariates)) problems.push('covariates: must be an object, e.g. {"weight_kg": 82, "age_y": 64, "sex": "M", "scr_mg_dL": 1.1}');
  const rawCov = isRecord(json.covariates) ? json.covariates : {};
  for (const [key, value] of Object.entries(rawCov)) {
    const at = `covariates.${key}`;
    const q = Object.prototype.hasOwnProperty.call(QUANTITY_KEYS, key) ? QUANTITY_KEYS[key] : undefined;
    if (q) {
      if (!finite(value)) {
        problems.push(`${at}: must be a number`);
        continue;
      }
      if (value < q.min || value > q.max) {
        problems.push(`${at}: ${value} is outside the plausible range ${q.min}-${q.max}; check the value and its unit`);
        continue;
      }
      if (q.canonical in covariates) problems.push(`${at}: serum creatinine is given twice (scr_mg_dL and scr_umol_L); keep one`);
      covariates[q.canonical] = value * q.factor;
      continue;
    }
    if (key === 'sex') {
      const s = typeof value === 'string' ? value.trim().toUpperCase() : '';
      if (s !== 'M' && s !== 'F') problems.push(`${at}: must be "M" or "F"`);
      else covariates.sex = s;
      continue;
    }
    const prefix = QUANTITY_PREFIXES.find((p) => key.toLowerCase().startsWith(p + '_'));
    if (prefix) {
      const known = Object.keys(QUANTITY_KEYS).filter((k) => k.startsWith(prefix === 'creatinine' ? 'scr' : prefix));
      problems.push(`${at}: unknown unit; give ${known.join(' or ')}`);
      continue;
    }
    // A near miss of a known name ("wieght_kg") is a typing error, not a new covariate.
    const near = key.length >= 5 && !ALIAS_NAMES.has(key.toLowerCase()) ? nearestKey(key, CANONICAL_COVARIATES) : undefined;
    if (near !== undefined && near !== key) {
      problems.push(`${at}: unknown covariate (did you mean "${near}"?)`);
      continue;
    }
    if (!(finite(value) || typeof value === 'string')) {
      problems.push(`${at}: must be a number or text`);
      continue;
    }
    covariates[key] = value;
  }
  // Cockcroft-Gault needs age, weight, sex and creatinine; computed unless given directly.
  const hasAll = ['age_y', 'weight_kg', 'scr_mg_dL', 'sex'].every((k) => k in covariates);
  if (!('crcl_mL_min' in covariates) && hasAll) {
    const crcl = cockcroftGault({ ageY: covariates.age_y as number, weightKg: covariates.weight_kg as number, scrMgDl: covariates.scr_mg_dL as number, sex: covariates.sex as Sex });
    if (Number.isFinite(crcl)) {
      covariates.crcl_mL_min = crcl;
      derived.crcl_mL_min = `${COCKCROFT_GAULT_LABEL}: ${crcl.toFixed(1)} mL/min`;
    }
  } else if ('crcl_mL_min' in covariates) derived.crcl_mL_min = 'given in the patient file (not derived)';
  if (!('scr_mg_dL' in covariates) && renal.length && Number.isFinite(renal[0].scrMgDl)) notes.push({ severity: 'note', code: 'scr-from-history', message: 'covariates carry no serum creatinine; the renal history is used only for the renal-change check' });

  let nextDoseH: number | undefined;
  if (json.next_dose_h !== undefined) {
    if (!finite(json.next_dose_h)) problems.push('next_dose_h: must be a number of hours from the first dose');
    else nextDoseH = json.next_dose_h;
  } else if (json.next_dose !== undefined) {
    if (time.mode !== 'clock' || typeof json.next_dose !== 'string' || parseLocalClock(json.next_dose) === undefined) problems.push('next_dose: give a clock time "YYYY-MM-DDTHH:MM" (with clock-timed doses) or use next_dose_h');
    else nextDoseH = ((parseLocalClock(json.next_dose) as number) - time.originMin) / 60;
  }
  if (nextDoseH !== undefined && doses.length) {
    const last = doses[doses.length - 1];
    if (nextDoseH < last.timeH + last.durationH) problems.push(`next_dose_h: ${fmtH(nextDoseH)} is before the last dose has finished (${fmtH(last.timeH + last.durationH)})`);
    else if (nextDoseH > last.timeH + MAX_NEXT_DOSE_DELAY_H) problems.push(`next_dose_h: ${fmtH(nextDoseH)} is more than ${MAX_NEXT_DOSE_DELAY_H} h after the last dose: the history no longer describes the patient then`);
  }

  if (problems.length) throw new PatientError(problems);
  return { id, covariates, derived, doses, levels, levelKinds, renal, ...(clockOrigin ? { clockOrigin } : {}), ...(nextDoseH !== undefined ? { nextDoseH } : {}), notes };
}

/** Ward clock time "YYYY-MM-DD HH:MM" of h hours after the clock origin; undefined without one. */
export function clockAt(origin: string | undefined, h: number): string | undefined {
  if (origin === undefined || !Number.isFinite(h)) return undefined;
  const m = parseLocalClock(origin);
  if (m === undefined) return undefined;
  const d = new Date(Math.round((m + h * 60) * 60000));
  const p = (x: number) => String(x).padStart(2, '0');
  return `${d.getUTCFullYear()}-${p(d.getUTCMonth() + 1)}-${p(d.getUTCDate())} ${p(d.getUTCHours())}:${p(d.getUTCMinutes())}`;
}

export function fmtH(h: number): string {
  return `${Number.isInteger(h) ? h : h.toFixed(2)} h`;
}

/** Alternative names a model may use for the patient's canonical covariates (case-insensitive). */
const ALIASES: Record<string, readonly string[]> = {
  weight_kg: ['wt', 'weight', 'bw', 'tbw'],
  height_cm: ['ht', 'height'],
  age_y: ['age'],
  sex: ['sex', 'gender'],
  scr_mg_dL: ['scr', 'creat', 'creatinine'],
  crcl_mL_min: ['crcl', 'clcr'],
};

const ALIAS_NAMES = new Set(Object.values(ALIASES).flat());

/** Look up the patient's value for a model covariate name: exact, then case-insensitive, then aliases. */
export function patientCovariate(patient: Patient, name: string): { value: CovariateValue; from: string } | undefined {
  if (name in patient.covariates) return { value: patient.covariates[name], from: name };
  const lower = name.toLowerCase();
  for (const k of Object.keys(patient.covariates)) if (k.toLowerCase() === lower) return { value: patient.covariates[k], from: k };
  for (const [canonical, names] of Object.entries(ALIASES)) {
    if (names.includes(lower) && canonical in patient.covariates) return { value: patient.covariates[canonical], from: canonical };
  }
  return undefined;
}
