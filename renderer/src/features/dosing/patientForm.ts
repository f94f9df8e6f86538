/**
 * The patient entry form as plain data, and its conversion to patient.json (the shape the dose
 * service reads). Nothing is dropped or guessed: every incomplete or unreadable row becomes a
 * problem naming the row and what to fill in, and the advice cannot be asked for until it is fixed.
 */
import type { Subject } from '../../../../engine/data/types.js';

export type TimeMode = 'clock' | 'hours';

export interface DoseRow {
  /** Clock time "YYYY-MM-DDTHH:MM" (clock mode) or hours from the first dose (hours mode), as typed. */
  time: string;
  amountMg: string;
  durationH: string;
  route: 'iv' | 'oral';
}

export interface LevelRow {
  time: string;
  concMgL: string;
  /** Below the limit of quantification: concMgL is then the LLOQ. */
  censored: boolean;
  kind: '' | 'trough' | 'peak';
}

export interface PatientForm {
  id: string;
  timeMode: TimeMode;
  weightKg: string;
  heightCm: string;
  ageY: string;
  sex: '' | 'F' | 'M';
  scrUmolL: string;
  /** Covariates other than the five above (from a dataset subject), kept as given. */
  otherCovariates: Record<string, number | string>;
  doses: DoseRow[];
  levels: LevelRow[];
  /** When the next dose can start (same time format); empty = one usual interval after the last. */
  doseDueAt: string;
  /** Other fields of a loaded patient file (e.g. a renal history), sent on unchanged so none is lost. */
  extra: Record<string, unknown>;
}

export function emptyForm(): PatientForm {
  return {
    id: '',
    timeMode: 'clock',
    weightKg: '',
    heightCm: '',
    ageY: '',
    sex: '',
    scrUmolL: '',
    otherCovariates: Object.create(null),
    doses: [{ time: '', amountMg: '', durationH: '1', route: 'iv' }],
    levels: [],
    doseDueAt: '',
    extra: Object.create(null),
  };
}

const num = (s: string): number | undefined => {
  const t = s.trim();
  if (!t) return undefined;
  const x = Number(t);
  return Number.isFinite(x) ? x : NaN;
};

const CLOCK = /^\d{4}-\d{2}-\d{2}[T ]\d{2}:\d{2}(:\d{2})?$/;

export interface FormResult {
  patient?: Record<string, unknown>;
  problems: string[];
}

/** patient.json from the form, or the list of problems that stop it. */
export function formToPatient(f: PatientForm): FormResult {
  const problems: string[] = [];
  if (!f.id.trim()) problems.push('Patient: give an identifier (a bed or study number, never a name).');
  const covariates: Record<string, number | string> = Object.create(null);
  for (const [k, v] of Object.entries(f.otherCovariates)) covariates[k] = v;
  const numeric: Array<[string, string, string]> = [
    ['weight_kg', f.weightKg, 'Weight (kg)'],
    ['height_cm', f.heightCm, 'Height (cm)'],
    ['age_y', f.ageY, 'Age (years)'],
    ['scr_umol_L', f.scrUmolL, 'Serum creatinine (µmol/L)'],
  ];
  for (const [key, text, label] of numeric) {
    const x = num(text);
    if (x === undefined) continue;
    if (Number.isNaN(x)) problems.push(`${label}: "${text}" is not a number.`);
    else covariates[key] = x;
  }
  if (f.sex) covariates.sex = f.sex;

  const timeOf = (text: string, where: string): string | number | undefined => {
    const t = text.trim();
    if (!t) {
      problems.push(`${where}: the time is empty; fill it in or remove the row.`);
      return undefined;
    }
    if (f.timeMode === 'clock') {
      if (!CLOCK.test(t)) {
        problems.push(`${where}: "${t}" is not a date and clock time (YYYY-MM-DD HH:MM).`);
        return undefined;
      }
      return t.replace(' ', 'T').slice(0, 16);
    }
    const h = num(t);
    if (h === undefined || Number.isNaN(h) || h < 0) {
      problems.push(`${where}: "${t}" is not a number of hours from the first dose (0 or more).`);
      return undefined;
    }
    return h;
  };
  const timeKey = f.timeMode === 'clock' ? 'time' : 'time_h';

  const doses: Record<string, unknown>[] = [];
  f.doses.forEach((d, i) => {
    const where = `Dose ${i + 1}`;
    const t = timeOf(d.time, where);
    const amount = num(d.amountMg);
    if (amount === undefined || Number.isNaN(amount) || amount <= 0) problems.push(`${where}: the amount must be a number of mg above 0 (it is "${d.amountMg}").`);
    let duration = num(d.durationH) ?? 0;
    if (d.route === 'iv' && (Number.isNaN(duration) || duration < 0)) {
      problems.push(`${where}: the infusion duration must be 0 (bolus) or more hours (it is "${d.durationH}").`);
      duration = 0;
    }
    if (t === undefined || amount === undefined || Number.isNaN(amount)) return;
    doses.push({ [timeKey]: t, amount_mg: amount, duration_h: d.route === 'oral' ? 0 : duration, route: d.route });
  });
  if (f.doses.length === 0) problems.push('Doses: enter at least the first dose; levels and forecasts are timed from it.');

  const levels: Record<string, unknown>[] = [];
  f.levels.forEach((l, i) => {
    const where = `Level ${i + 1}`;
    const t = timeOf(l.time, where);
    const c = num(l.concMgL);
    if (c === undefined || Number.isNaN(c) || c < 0) problems.push(`${where}: the concentration must be a number of mg/L (it is "${l.concMgL}")${l.censored ? '; for a level below the limit enter the limit' : ''}.`);
    if (t === undefined || c === undefined || Number.isNaN(c)) return;
    levels.push({ [timeKey]: t, conc_mg_L: c, censored: l.censored, ...(l.kind ? { kind: l.kind } : {}) });
  });

  const patient: Record<string, unknown> = { ...f.extra, id: f.id.trim(), covariates, doses, levels };
  if (f.doseDueAt.trim()) {
    if (f.timeMode === 'clock') {
      const t = timeOf(f.doseDueAt, 'Next dose');
      if (t !== undefined) patient.next_dose = t;
    } else {
      const h = num(f.doseDueAt);
      if (h === undefined || Number.isNaN(h)) problems.push(`Next dose: "${f.doseDueAt}" is not a number of hours.`);
      else patient.next_dose_h = h;
    }
  }
  return problems.length ? { problems } : { patient, problems };
}

/** The form filled from a dataset subject (hours from its first event; covariates as recorded). */
export function formFromSubject(s: Subject): PatientForm {
  const f = emptyForm();
  f.id = s.id;
  f.timeMode = 'hours';
  const other: Record<string, number | string> = Object.create(null);
  for (const [k, v] of Object.entries(s.covariates)) {
    if (k === 'weight_kg') f.weightKg = String(v);
    else if (k === 'height_cm') f.heightCm = String(v);
    else if (k === 'age_y') f.ageY = String(v);
    else if (k === 'sex' && (v === 'F' || v === 'M')) f.sex = v;
    else if (k === 'scr_umol_L') f.scrUmolL = String(v);
    else other[k] = v;
  }
  f.otherCovariates = other;
  f.doses = s.doses.map((d) => ({ time: String(d.timeH), amountMg: String(d.amountMg), durationH: String(d.durationH), route: d.route === 'oral' ? 'oral' : 'iv' }));
  f.levels = s.observations.map((o) => ({ time: String(o.timeH), concMgL: String(o.valueMgL), censored: o.censored, kind: '' }));
  return f;
}

/** The form filled from a patient.json (the demo patient, a saved one). */
export function formFromPatientJson(p: Record<string, unknown>): PatientForm {
  const f = emptyForm();
  f.id = String(p.id ?? '');
  const cov = (p.covariates ?? {}) as Record<string, number | string>;
  const other: Record<string, number | string> = Object.create(null);
  for (const [k, v] of Object.entries(cov)) {
    if (k === 'weight_kg') f.weightKg = String(v);
    else if (k === 'height_cm') f.heightCm = String(v);
    else if (k === 'age_y') f.ageY = String(v);
    else if (k === 'sex' && (v === 'F' || v === 'M')) f.sex = v;
    else if (k === 'scr_umol_L') f.scrUmolL = String(v);
    else other[k] = v;
  }
  f.otherCovariates = other;
  const doses = (p.doses ?? []) as Record<string, unknown>[];
  const levels = (p.levels ?? []) as Record<string, unknown>[];
  f.timeMode = [...doses, ...levels].some((r) => r.time !== undefined) ? 'clock' : 'hours';
  const t = (r: Record<string, unknown>) => String(f.timeMode === 'clock' ? (r.time ?? '') : (r.time_h ?? ''));
  f.doses = doses.map((d) => ({ time: t(d), amountMg: String(d.amount_mg ?? ''), durationH: String(d.duration_h ?? 0), route: d.route === 'oral' ? 'oral' : 'iv' }));
  f.levels = levels.map((l) => ({ time: t(l), concMgL: String(l.conc_mg_L ?? ''), censored: l.censored === true, kind: l.kind === 'trough' || l.kind === 'peak' ? l.kind : '' }));
  if (typeof p.next_dose === 'string') f.doseDueAt = p.next_dose;
  else if (typeof p.next_dose_h === 'number') f.doseDueAt = String(p.next_dose_h);
  const known = new Set(['id', 'covariates', 'doses', 'levels', 'next_dose', 'next_dose_h']);
  const extra: Record<string, unknown> = Object.create(null);
  for (const [k, v] of Object.entries(p)) if (!known.has(k)) extra[k] = v;
  f.extra = extra;
  return f;
}

/**
 * Rows pasted from a spreadsheet (tab- or semicolon-separated): doses as "time, amount mg,
 * duration h", levels as "time, concentration mg/L[, <]". Lines that cannot be read are
 * returned as problems with their line number, not skipped.
 */
export function parsePasted(text: string, kind: 'doses' | 'levels'): { doses: DoseRow[]; levels: LevelRow[]; problems: string[] } {
  const doses: DoseRow[] = [];
  const levels: LevelRow[] = [];
  const problems: string[] = [];
  text.split(/\r?\n/).forEach((line, i) => {
    if (!line.trim()) return;
    const cells = line.split(/\t|;/).map((c) => c.trim());
    if (/^[a-z]/i.test(cells[0]) && !/^\d/.test(cells[0])) return; // a header line
    if (kind === 'doses') {
      if (cells.length < 2) problems.push(`Pasted line ${i + 1}: expected "time, amount mg, duration h", got "${line}".`);
      else doses.push({ time: cells[0], amountMg: cells[1], durationH: cells[2] ?? '0', route: 'iv' });
    } else {
      if (cells.length < 2) problems.push(`Pasted line ${i + 1}: expected "time, concentration mg/L", got "${line}".`);
      else {
        const censored = cells[1].startsWith('<') || /^(blq|<lloq)$/i.test(cells[2] ?? '');
        levels.push({ time: cells[0], concMgL: cells[1].replace(/^</, '').trim(), censored, kind: '' });
      }
    }
  });
  return { doses, levels, problems };
}
