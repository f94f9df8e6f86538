/**
 * Clinical targets: what exposure a regimen aims at and what exposure counts as toxic. Presets
 * live as JSON in resources/targets (each with its published source and "check local
 * protocol"); a user's own target file has the same shape. Validation reports JSON paths.
 */
import { unknownKeyProblems } from '../json/knownKeys.js';
import { wrongKindMessage } from '../spec/fileKind.js';

/** Exposure metrics at steady state over one dosing interval. */
export type MetricId = 'auc24' | 'trough' | 'peak' | 'peakAt' | 'ftAbove';

export const METRIC_LABELS: Record<MetricId, { label: string; unit: string }> = {
  auc24: { label: 'AUC24', unit: 'mg.h/L' },
  trough: { label: 'trough', unit: 'mg/L' },
  peak: { label: 'peak (end of infusion)', unit: 'mg/L' },
  peakAt: { label: 'peak (drawn after the end of infusion)', unit: 'mg/L' },
  ftAbove: { label: 'time above threshold', unit: '% of interval' },
};

export interface Condition {
  metric: MetricId;
  /** Bounds in the metric's unit, or as multiples of the MIC when perMic is true. */
  min?: number;
  max?: number;
  perMic?: boolean;
}

export interface RegimenSettings {
  /** Doses are multiples of this (mg), e.g. 250. */
  strengthMg: number;
  minDoseMg: number;
  maxDoseMg: number;
  intervalsH: number[];
  /** Infusion durations to try (h); with maxRateMgPerH, durations shorter than dose/rate are dropped. */
  durationsH: number[];
  maxRateMgPerH?: number;
  maxDailyDoseMg?: number;
}

export interface TargetSpec {
  id: string;
  label: string;
  drug?: string;
  /** Published source of the target, in full. */
  source: string;
  /** How sure we are of the source text: 'verified' or 'from memory'. */
  sourceStatus: 'verified' | 'from memory';
  /** Always present and shown: targets differ between hospitals and indications. */
  localProtocol: string;
  /** MIC assumed for per-MIC bounds (mg/L); set it to the organism's MIC. */
  micMgL?: number;
  /** Unbound fraction: free-drug thresholds (ftAbove) apply to fu x total concentration. */
  unboundFraction?: number;
  /** Sampling delay after the end of infusion for peakAt (h). */
  peakDelayH?: number;
  /** Threshold for ftAbove (mg/L, free concentration); default the MIC. */
  thresholdMgL?: number;
  /** All must hold for the target to be attained. */
  goals: Condition[];
  /** Any of these (max exceeded) counts as a toxic exposure. */
  toxic: Condition[];
  regimen?: RegimenSettings;
  /** Interval to stay near when ranking ties and the patient has no current interval (h). */
  preferIntervalH?: number;
  notes?: string[];
}

export class TargetError extends Error {
  readonly problems: readonly string[];
  constructor(problems: readonly string[]) {
    super(`invalid target:\n${problems.map((p) => `  ${p}`).join('\n')}`);
    this.name = 'TargetError';
    this.problems = problems;
  }
}


/** Every key a target file may have, at each level (unknown keys are errors naming the nearest). */
export const TARGET_KEYS = ['id', 'label', 'drug', 'source', 'sourceStatus', 'localProtocol', 'micMgL', 'unboundFraction', 'peakDelayH', 'thresholdMgL', 'goals', 'toxic', 'regimen', 'preferIntervalH', 'notes'] as const;
export const CONDITION_KEYS = ['metric', 'min', 'max', 'perMic'] as const;
export const REGIMEN_KEYS = ['strengthMg', 'minDoseMg', 'maxDoseMg', 'intervalsH', 'durationsH', 'maxRateMgPerH', 'maxDailyDoseMg'] as const;

/**
 * Bounds on regimen settings (common practice, wide): they keep the candidate grid to a size that
 * is evaluated in seconds and refuse values no ward would give, stated in --help and the README.
 */
export const REGIMEN_BOUNDS = {
  strengthMg: [0.1, 10_000],
  doseMg: [0.1, 20_000],
  intervalH: [1, 168],
  durationH: [0.05, 24],
  maxIntervals: 12,
  maxDurations: 8,
  maxRateMgPerH: [1, 100_000],
  maxDailyDoseMg: [1, 100_000],
  /** Doses per interval and duration: (maxDoseMg - minDoseMg) / strengthMg + 1. */
  maxDoseSteps: 400,
} as const;

const METRICS = Object.keys(METRIC_LABELS) as MetricId[];
const isRecord = (x: unknown): x is Record<string, unknown> => typeof x === 'object' && x !== null && !Array.isArray(x);
const finite = (x: unknown): x is number => typeof x === 'number' && Number.isFinite(x);

function parseConditions(raw: unknown, at: string, problems: string[], needMax: boolean): Condition[] {
  if (raw === undefined) return [];
  if (!Array.isArray(raw)) {
    problems.push(`${at}: must be a list of {metric, min?, max?, perMic?}`);
    return [];
  }
  const out: Condition[] = [];
  raw.forEach((c, i) => {
    const p = `${at}[${i}]`;
    if (!isRecord(c)) return void problems.push(`${p}: must be an object {metric, min?, max?}`);
    problems.push(...unknownKeyProblems(c, CONDITION_KEYS, p));
    const metric = c.metric as MetricId;
    if (!METRICS.includes(metric)) problems.push(`${p}.metric: one of ${METRICS.join(', ')}`);
    if (c.min !== undefined && !finite(c.min)) problems.push(`${p}.min: must be a number`);
    if (c.max !== undefined && !finite(c.max)) problems.push(`${p}.max: must be a number`);
    if (c.min === undefined && c.max === undefined) problems.push(`${p}: give min, max or both`);
    if (needMax && c.max === undefined) problems.push(`${p}.max: a toxicity condition is a maximum`);
    if (finite(c.min) && finite(c.max) && c.min > c.max) problems.push(`${p}: min is above max`);
    if (c.perMic !== undefined && typeof c.perMic !== 'boolean') problems.push(`${p}.perMic: true or false`);
    out.push({ metric, ...(finite(c.min) ? { min: c.min } : {}), ...(finite(c.max) ? { max: c.max } : {}), ...(c.perMic === true ? { perMic: true } : {}) });
  });
  return out;
}

function parseRegimen(raw: unknown, problems: string[]): RegimenSettings | undefined {
  if (raw === undefined) return undefined;
  if (!isRecord(raw)) {
    problems.push('regimen: must be an object {strengthMg, minDoseMg, maxDoseMg, intervalsH, durationsH}');
    return undefined;
  }
  problems.push(...unknownKeyProblems(raw, REGIMEN_KEYS, 'regimen'));
  const at = (k: string) => `regimen.${k}`;
  return checkRegimenSettings(
    {
      strengthMg: raw.strengthMg as number,
      minDoseMg: raw.minDoseMg as number,
      maxDoseMg: raw.maxDoseMg as number,
      intervalsH: (Array.isArray(raw.intervalsH) ? raw.intervalsH.slice() : raw.intervalsH) as number[],
      durationsH: (Array.isArray(raw.durationsH) ? raw.durationsH.slice() : raw.durationsH) as number[],
      ...(raw.maxRateMgPerH !== undefined ? { maxRateMgPerH: raw.maxRateMgPerH as number } : {}),
      ...(raw.maxDailyDoseMg !== undefined ? { maxDailyDoseMg: raw.maxDailyDoseMg as number } : {}),
    },
    problems,
    at,
  );
}

/**
 * Check regimen settings against REGIMEN_BOUNDS (from a target file or a caller); every problem
 * names the setting and the bound. Returns the settings (valid only when no problem was added).
 */
export function checkRegimenSettings(r: RegimenSettings, problems: string[], at: (k: string) => string = (k) => k): RegimenSettings {
  const B = REGIMEN_BOUNDS;
  const inRange = (k: string, v: unknown, [lo, hi]: readonly [number, number], unit: string) => {
    if (!(finite(v) && v >= lo && v <= hi)) problems.push(`${at(k)}: must be a number from ${lo} to ${hi} ${unit}${finite(v) ? `, got ${v}` : ''}`);
  };
  inRange('strengthMg', r.strengthMg, B.strengthMg, 'mg');
  inRange('minDoseMg', r.minDoseMg, B.doseMg, 'mg');
  inRange('maxDoseMg', r.maxDoseMg, B.doseMg, 'mg');
  const list = (k: 'intervalsH' | 'durationsH', bounds: readonly [number, number], max: number) => {
    const v = r[k] as unknown;
    if (!(Array.isArray(v) && v.length > 0 && v.length <= max && v.every((x) => finite(x) && x >= bounds[0] && x <= bounds[1])))
      problems.push(`${at(k)}: must be a list of 1 to ${max} numbers from ${bounds[0]} to ${bounds[1]} h`);
  };
  list('intervalsH', B.intervalH, B.maxIntervals);
  list('durationsH', B.durationH, B.maxDurations);
  if (r.maxRateMgPerH !== undefined) inRange('maxRateMgPerH', r.maxRateMgPerH, B.maxRateMgPerH, 'mg/h');
  if (r.maxDailyDoseMg !== undefined) inRange('maxDailyDoseMg', r.maxDailyDoseMg, B.maxDailyDoseMg, 'mg');
  if (finite(r.minDoseMg) && finite(r.maxDoseMg) && r.minDoseMg > r.maxDoseMg) problems.push(`${at('minDoseMg')}: ${r.minDoseMg} mg is above maxDoseMg ${r.maxDoseMg} mg`);
  else if (finite(r.strengthMg) && r.strengthMg > 0 && finite(r.minDoseMg) && finite(r.maxDoseMg)) {
    const steps = Math.floor((r.maxDoseMg - r.minDoseMg) / r.strengthMg) + 1;
    if (steps > B.maxDoseSteps)
      problems.push(`${at('strengthMg')}: ${r.strengthMg} mg steps from ${r.minDoseMg} to ${r.maxDoseMg} mg give ${steps} doses to try, more than ${B.maxDoseSteps}; use a larger strength or a narrower dose range`);
  }
  return r;
}

/** Validate a target (a preset or the user's own file). */
export function parseTarget(json: unknown): TargetSpec {
  const problems: string[] = [];
  if (!isRecord(json)) throw new TargetError(['the target must be a JSON object {id, label, source, goals, toxic}']);
  const wrong = json.goals === undefined ? wrongKindMessage(json, ['target file']) : undefined;
  if (wrong) throw new TargetError([`${wrong}: give a target preset or file (id, label, source, goals, toxic)`]);
  problems.push(...unknownKeyProblems(json, TARGET_KEYS));
  const text = (k: string, required: boolean): string => {
    const v = json[k];
    if (v === undefined && !required) return '';
    if (typeof v !== 'string' || !v.trim()) problems.push(`${k}: must be text`);
    return typeof v === 'string' ? v : '';
  };
  const id = text('id', true);
  const label = text('label', true);
  const source = text('source', true);
  const localProtocol = typeof json.localProtocol === 'string' && /check local protocol/i.test(json.localProtocol) ? json.localProtocol : 'check local protocol';
  if (json.sourceStatus !== undefined && json.sourceStatus !== 'verified' && json.sourceStatus !== 'from memory') problems.push('sourceStatus: must be "verified" or "from memory"');
  const sourceStatus = json.sourceStatus === 'verified' ? 'verified' : 'from memory';
  // Upper bounds (common practice): an MIC or threshold beyond 1024 mg/L, or a preferred interval
  // beyond a week, is a typing error, and 1e308 would make every metric ratio 0.
  const UPPER: Record<string, number> = { micMgL: 1024, thresholdMgL: 2000, preferIntervalH: 168, unboundFraction: 1 };
  const num = (k: string): number | undefined => {
    const v = json[k];
    if (v === undefined) return undefined;
    if (!(finite(v) && v > 0)) problems.push(`${k}: must be a number > 0`);
    else if (UPPER[k] !== undefined && v > UPPER[k] && k !== 'unboundFraction') problems.push(`${k}: must be a number > 0 and at most ${UPPER[k]}, got ${v}`);
    return v as number;
  };
  const micMgL = num('micMgL');
  const unboundFraction = num('unboundFraction');
  if (unboundFraction !== undefined && unboundFraction > 1) problems.push('unboundFraction: must lie in (0, 1]');
  const peakDelayH = json.peakDelayH === undefined ? undefined : finite(json.peakDelayH) && json.peakDelayH >= 0 ? json.peakDelayH : (problems.push('peakDelayH: must be a number of hours >= 0'), undefined);
  const thresholdMgL = num('thresholdMgL');
  const preferIntervalH = num('preferIntervalH');
  const goals = parseConditions(json.goals, 'goals', problems, false);
  if (goals.length === 0 && json.goals !== undefined) problems.push('goals: give at least one condition');
  if (json.goals === undefined) problems.push('goals: missing (a list of {metric, min?, max?})');
  const toxic = parseConditions(json.toxic, 'toxic', problems, true);
  for (const c of [...goals, ...toxic]) if (c.perMic && micMgL === undefined) problems.push(`${c.metric}: bounds per MIC need micMgL`);
  if ([...goals, ...toxic].some((c) => c.metric === 'ftAbove') && micMgL === undefined && thresholdMgL === undefined) problems.push('ftAbove needs micMgL or thresholdMgL');
  const regimen = parseRegimen(json.regimen, problems);
  if (json.notes !== undefined && !(Array.isArray(json.notes) && json.notes.every((n) => typeof n === 'string'))) problems.push('notes: must be a list of text');
  const notes = Array.isArray(json.notes) ? json.notes.filter((n): n is string => typeof n === 'string') : undefined;
  if (problems.length) throw new TargetError(problems);
  const drug = typeof json.drug === 'string' ? json.drug : undefined;
  return {
    id, label, ...(drug ? { drug } : {}), source, sourceStatus, localProtocol,
    ...(micMgL !== undefined ? { micMgL } : {}), ...(unboundFraction !== undefined ? { unboundFraction } : {}),
    ...(peakDelayH !== undefined ? { peakDelayH } : {}), ...(thresholdMgL !== undefined ? { thresholdMgL } : {}),
    goals, toxic, ...(regimen ? { regimen } : {}), ...(preferIntervalH !== undefined ? { preferIntervalH } : {}), ...(notes ? { notes } : {}),
  };
}

/** Bounds in the metric's own unit (per-MIC bounds multiplied out). */
export function resolvedBounds(target: TargetSpec, c: Condition): { min: number; max: number } {
  const f = c.perMic ? (target.micMgL as number) : 1;
  return { min: c.min !== undefined ? c.min * f : -Infinity, max: c.max !== undefined ? c.max * f : Infinity };
}

/** Total-concentration threshold for ftAbove: the free threshold (MIC) divided by the unbound fraction. */
export function ftThresholdMgL(target: TargetSpec): number {
  const free = target.thresholdMgL ?? target.micMgL ?? NaN;
  return free / (target.unboundFraction ?? 1);
}

/** Metrics a target needs evaluated (goals and toxicity). */
export function metricsNeeded(target: TargetSpec): Set<MetricId> {
  return new Set([...target.goals, ...target.toxic].map((c) => c.metric));
}

/** The unit of a metric's values (mg/L for levels, mg.h/L for AUC24). */
export function metricUnit(metric: MetricId): string {
  return METRIC_LABELS[metric].unit;
}

/** The metric's label, with the sampling delay for peakAt. */
export function metricLabel(target: TargetSpec, metric: MetricId): string {
  if (metric === 'peakAt') return `level ${target.peakDelayH ?? 0} h after the end of infusion`;
  return METRIC_LABELS[metric].label;
}

/** Plain words for a condition, e.g. "AUC24 400-600 mg.h/L". */
export function describeCondition(target: TargetSpec, c: Condition): string {
  const { unit } = METRIC_LABELS[c.metric];
  const label = metricLabel(target, c.metric);
  const { min, max } = resolvedBounds(target, c);
  const mic = c.perMic ? ` (${c.min ?? ''}${c.min !== undefined && c.max !== undefined ? '-' : ''}${c.max ?? ''} x MIC ${target.micMgL} mg/L)` : '';
  const fmt = (x: number) => (Math.abs(x) >= 100 ? x.toFixed(0) : String(Number(x.toPrecision(3))));
  if (Number.isFinite(min) && Number.isFinite(max)) return `${label} ${fmt(min)}-${fmt(max)} ${unit}${mic}`;
  if (Number.isFinite(min)) return `${label} >= ${fmt(min)} ${unit}${mic}`;
  return `${label} <= ${fmt(max)} ${unit}${mic}`;
}

/** Plain words for a toxicity condition, e.g. "AUC24 above 600 mg.h/L". */
export function describeToxic(target: TargetSpec, c: Condition): string {
  const { unit } = METRIC_LABELS[c.metric];
  const label = metricLabel(target, c.metric);
  const { max } = resolvedBounds(target, c);
  return `${label} above ${Math.abs(max) >= 100 ? max.toFixed(0) : String(Number(max.toPrecision(3)))} ${unit}`;
}
