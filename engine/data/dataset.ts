import {
  DataError,
  type CovariateValue,
  type DataProblem,
  type Dataset,
  type Dose,
  type Observation,
  type Subject,
} from './types.js';

/** Raw subject as read from a file or built by code, before validation. */
export interface SubjectInput {
  id: string;
  covariates?: Record<string, CovariateValue>;
  doses: Dose[];
  observations: Observation[];
}

const ROUTES = new Set(['bolus', 'infusion', 'oral']);

function finiteNonNegative(x: unknown): x is number {
  return typeof x === 'number' && Number.isFinite(x) && x >= 0;
}

/**
 * Validate subjects and build a dataset. Every invalid record is reported (subject, source row,
 * field, reason); nothing is dropped silently. Doses and observations are sorted by time (stable,
 * so simultaneous records keep their source order).
 */
export function createDataset(inputs: readonly SubjectInput[], covariateNames?: readonly string[]): Dataset {
  const problems: DataProblem[] = [];
  const seen = new Set<string>();
  const subjects: Subject[] = [];
  const names = new Set<string>(covariateNames ?? []);

  if (inputs.length === 0) problems.push({ message: 'the dataset has no subjects' });

  for (const input of inputs) {
    const subject = typeof input.id === 'string' ? input.id.trim() : '';
    if (!subject) {
      problems.push({ field: 'subject', message: 'subject id is empty' });
      continue;
    }
    if (seen.has(subject)) {
      problems.push({ subject, field: 'subject', message: 'subject id appears twice in the dataset' });
      continue;
    }
    seen.add(subject);

    for (const d of input.doses) {
      const at = { subject, row: d.sourceRow };
      if (!finiteNonNegative(d.timeH)) problems.push({ ...at, field: 'time_h', message: `dose time must be a number >= 0, got ${d.timeH}` });
      if (!(typeof d.amountMg === 'number' && Number.isFinite(d.amountMg) && d.amountMg > 0))
        problems.push({ ...at, field: 'amount_mg', message: `dose amount must be a number > 0, got ${d.amountMg}` });
      if (!ROUTES.has(d.route)) problems.push({ ...at, field: 'route', message: `unknown route "${d.route}" (bolus, infusion or oral)` });
      if (!finiteNonNegative(d.durationH)) problems.push({ ...at, field: 'duration_h', message: `infusion duration must be a number >= 0, got ${d.durationH}` });
      else if (d.route === 'infusion' && d.durationH <= 0) problems.push({ ...at, field: 'duration_h', message: 'an infusion needs a duration > 0' });
      else if (d.route !== 'infusion' && d.durationH !== 0) problems.push({ ...at, field: 'duration_h', message: `a ${d.route} dose has no duration` });
      if (d.steadyStateIntervalH !== undefined) {
        if (!(Number.isFinite(d.steadyStateIntervalH) && d.steadyStateIntervalH > 0))
          problems.push({ ...at, field: 'ss_interval_h', message: `steady-state interval must be > 0, got ${d.steadyStateIntervalH}` });
        else if (d.route === 'infusion' && d.durationH > d.steadyStateIntervalH)
          problems.push({ ...at, field: 'duration_h', message: 'a steady-state infusion must be shorter than its interval' });
      }
    }
    for (const o of input.observations) {
      const at = { subject, row: o.sourceRow };
      if (!finiteNonNegative(o.timeH)) problems.push({ ...at, field: 'time_h', message: `level time must be a number >= 0, got ${o.timeH}` });
      if (typeof o.censored !== 'boolean') problems.push({ ...at, field: 'censored', message: 'censored flag must be true or false' });
      if (!(typeof o.valueMgL === 'number' && Number.isFinite(o.valueMgL)))
        problems.push({ ...at, field: 'conc_mg_L', message: `level must be a number, got ${o.valueMgL}` });
      if (o.censored) {
        if (!(typeof o.lloqMgL === 'number' && Number.isFinite(o.lloqMgL) && o.lloqMgL > 0))
          problems.push({ ...at, field: 'lloq_mg_L', message: 'a censored level needs its LLOQ (> 0)' });
      } else if (o.lloqMgL !== undefined && !(Number.isFinite(o.lloqMgL) && o.lloqMgL > 0)) {
        problems.push({ ...at, field: 'lloq_mg_L', message: `LLOQ must be > 0, got ${o.lloqMgL}` });
      }
    }

    const covariates: Record<string, CovariateValue> = Object.create(null);
    for (const [k, v] of Object.entries(input.covariates ?? {})) {
      if (typeof v === 'number' && !Number.isFinite(v)) {
        problems.push({ subject, field: k, message: `covariate ${k} is not a finite number` });
        continue;
      }
      if (typeof v !== 'number' && typeof v !== 'string') {
        problems.push({ subject, field: k, message: `covariate ${k} must be a number or text` });
        continue;
      }
      covariates[k] = v;
      names.add(k);
    }

    const byTime = <T extends { timeH: number }>(a: T, b: T) => a.timeH - b.timeH;
    subjects.push({
      id: subject,
      covariates: Object.freeze(covariates),
      doses: Object.freeze(input.doses.map((d) => ({ ...d })).sort(byTime)),
      observations: Object.freeze(
        input.observations.map((o) => ({ ...o, ...(o.censored ? { valueMgL: o.lloqMgL ?? o.valueMgL } : {}) })).sort(byTime),
      ),
    });
  }

  if (problems.length) throw new DataError(problems);
  return Object.freeze({ subjects: Object.freeze(subjects), covariateNames: Object.freeze([...names]) });
}

/** Total number of observations (censored included). */
export function countObservations(dataset: Dataset): number {
  let n = 0;
  for (const s of dataset.subjects) n += s.observations.length;
  return n;
}

/**
 * The range of every numeric covariate over the subjects (min, max), for a fit to record the
 * population it was built on; dose advice warns when a patient lies outside it.
 */
export function covariateRanges(dataset: Dataset): Record<string, [number, number]> {
  const ranges: Record<string, [number, number]> = Object.create(null);
  for (const name of dataset.covariateNames) {
    let lo = Infinity;
    let hi = -Infinity;
    let numeric = true;
    for (const s of dataset.subjects) {
      const v = s.covariates[name];
      if (v === undefined) continue;
      if (typeof v !== 'number') {
        numeric = false;
        break;
      }
      if (v < lo) lo = v;
      if (v > hi) hi = v;
    }
    if (numeric && lo <= hi) ranges[name] = [lo, hi];
  }
  return ranges;
}
