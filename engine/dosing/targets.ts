/**
 * Clinical targets: what exposure a regimen aims at and what exposure counts as toxic. Presets
 * live as JSON in resources/targets (each with its published source and "check local
 * protocol"); a user's own target file has the same shape. Validation reports JSON paths.
 */

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
  const pos = (k: string) => {
    const v = raw[k];
    if (!(finite(v) && v > 0)) problems.push(`regimen.${k}: must be a number > 0`);
    return v as number;
  };
  const list = (k: string) => {
    const v = raw[k];
    if (!(Array.isArray(v) && v.length > 0 && v.every((x) => finite(x) && x > 0))) problems.push(`regimen.${k}: must be a non-empty list of numbers > 0`);
    return Array.isArray(v) ? (v as number[]).slice() : [];
  };
  const r: RegimenSettings = { strengthMg: pos('strengthMg'), minDoseMg: pos('minDoseMg'), maxDoseMg: pos('maxDoseMg'), intervalsH: list('intervalsH'), durationsH: list('durationsH') };
  if (raw.maxRateMgPerH !== undefined) r.maxRateMgPerH = pos('maxRateMgPerH');
  if (raw.maxDailyDoseMg !== undefined) r.maxDailyDoseMg = pos('maxDailyDoseMg');
  if (r.minDoseMg > r.maxDoseMg) problems.push('regimen: minDoseMg is above maxDoseMg');
  return r;
}

/** Validate a target (a preset or the user's own file). */
export function parseTarget(json: unknown): TargetSpec {
  const problems: string[] = [];
  if (!isRecord(json)) throw new TargetError(['the target must be a JSON object {id, label, source, goals, toxic}']);
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
  const sourceStatus = json.sourceStatus === 'verified' ? 'verified' : 'from memory';
  const num = (k: string): number | undefined => {
    const v = json[k];
    if (v === undefined) return undefined;
    if (!(finite(v) && v > 0)) problems.push(`${k}: must be a number > 0`);
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
