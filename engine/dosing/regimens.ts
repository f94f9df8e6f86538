/**
 * Candidate regimens: a grid of practical doses (multiples of a strength, within min/max),
 * intervals and infusion durations; evaluation of every candidate over the posterior draws;
 * ranking by the probability of target attainment and of toxic exposure; plain-word
 * explanations; and the `--evaluate "1000mg q12h 1h"` parser.
 * Probability of target attainment = share of draws whose metrics meet every goal.
 */
import type { Route } from '../data/types.js';
import type { StructuralModel } from '../models/types.js';
import { buildSteadyStateEvaluator, isDoseLinear, METRIC_IDS, type Regimen } from './metrics.js';
import { bandOf, sig, type Band } from './summary.js';
import { describeCondition, describeToxic, metricLabel, ftThresholdMgL, METRIC_LABELS, metricsNeeded, resolvedBounds, type MetricId, type RegimenSettings, type TargetSpec } from './targets.js';

export type { Regimen };

export interface RegimenResult {
  doseMg: number;
  intervalH: number;
  durationH: number;
  route: Route;
  loadingDoseMg?: number;
  /** Why a loading dose was or was not given (with --loading-dose), in words with the predicted peaks. */
  loadingNote?: string;
  dailyDoseMg: number;
  pTarget: number;
  /**
   * P(toxic exposure) at steady state or in any of the first intervals after the change (the
   * intervals the forecast shows). NaN without goals (no target). Null when the target defines
   * no toxicity threshold.
   */
  pToxic: number | null;
  /** P(toxic) at steady state only. */
  pToxicSteadyState?: number | null;
  /** P(toxic) in the first intervals after the change only (drug on board, loading dose). */
  pToxicFirstIntervals?: number | null;
  /** Steady-state metrics with their bands; ftAbove only when a threshold is known. */
  metrics: Partial<Record<MetricId, Band>>;
  /** Draws the model could not evaluate: counted as not attained and as toxic. */
  failedDraws: number;
  explanation?: string;
}

export const DEFAULT_REGIMEN_SETTINGS: RegimenSettings = {
  strengthMg: 250,
  minDoseMg: 250,
  maxDoseMg: 3000,
  intervalsH: [6, 8, 12, 24, 36, 48],
  durationsH: [1],
};

/** Every practical regimen of the settings (dose multiples of the strength; rate and daily limits applied). */
export function regimenGrid(settings: RegimenSettings, route: Route = 'infusion'): Regimen[] {
  const out: Regimen[] = [];
  const first = Math.ceil(settings.minDoseMg / settings.strengthMg - 1e-9) * settings.strengthMg;
  for (let dose = first; dose <= settings.maxDoseMg + 1e-9; dose += settings.strengthMg) {
    const doseMg = Math.round(dose * 1e6) / 1e6;
    for (const tau of settings.intervalsH) {
      if (settings.maxDailyDoseMg !== undefined && (doseMg * 24) / tau > settings.maxDailyDoseMg + 1e-9) continue;
      if (route !== 'infusion') {
        out.push({ doseMg, intervalH: tau, durationH: 0, route });
        continue;
      }
      const durations = settings.durationsH.filter((d) => d < tau && (settings.maxRateMgPerH === undefined || doseMg / d <= settings.maxRateMgPerH + 1e-9));
      // With a rate limit only the shortest allowed duration is a distinct practical choice.
      const chosen = settings.maxRateMgPerH !== undefined && durations.length ? [Math.min(...durations)] : durations;
      for (const d of chosen) out.push({ doseMg, intervalH: tau, durationH: d, route });
    }
  }
  return out;
}

export class RegimenParseError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'RegimenParseError';
  }
}

/**
 * Parse a regimen such as "1000mg q12h 1h", "1 g q24h over 30 min", "load 2000mg 1000mg q12h 2h",
 * "500 mg q8h bolus", "250 mg q12h oral".
 */
export function parseRegimen(text: string): Regimen {
  const src = text.trim().toLowerCase().replace(/,/g, ' ');
  const fail = (why: string): never => {
    throw new RegimenParseError(`cannot read the regimen "${text}": ${why}. Write it like "1000mg q12h 1h" (dose, interval, infusion duration), optionally "load 2000mg" first`);
  };
  const amount = (num: string, unit: string): number => Number(num) * (unit === 'g' ? 1000 : 1);
  let rest = src;
  let loadingDoseMg: number | undefined;
  const load = /\b(?:load(?:ing)?(?:\s+dose)?|ld)\s*(\d+(?:\.\d+)?)\s*(mg|g)\b(?:\s+then)?/.exec(rest);
  if (load) {
    loadingDoseMg = amount(load[1], load[2]);
    rest = rest.replace(load[0], ' ');
  }
  const dose = /(\d+(?:\.\d+)?)\s*(mg|g)\b/.exec(rest);
  if (!dose) fail('no dose amount with its unit (mg or g)');
  rest = rest.replace((dose as RegExpExecArray)[0], ' ');
  const q = /\bq\s*(\d+(?:\.\d+)?)\s*h?\b|\bevery\s+(\d+(?:\.\d+)?)\s*h(?:ours?)?\b/.exec(rest);
  if (!q) fail('no dosing interval (e.g. q12h)');
  const intervalH = Number((q as RegExpExecArray)[1] ?? (q as RegExpExecArray)[2]);
  rest = rest.replace((q as RegExpExecArray)[0], ' ');
  let route: Route = 'infusion';
  let durationH = NaN;
  if (/\boral\b|\bpo\b/.test(rest)) {
    route = 'oral';
    durationH = 0;
    rest = rest.replace(/\boral\b|\bpo\b/, ' ');
  } else if (/\bbolus\b/.test(rest)) {
    route = 'bolus';
    durationH = 0;
    rest = rest.replace(/\bbolus\b/, ' ');
  } else {
    const d = /(?:\bover\s+)?(\d+(?:\.\d+)?)\s*(h|hr|hours?|min|mins|minutes?)\b/.exec(rest);
    if (!d) fail('no infusion duration (e.g. 1h or 30min; or say bolus / oral)');
    const dd = d as RegExpExecArray;
    durationH = Number(dd[1]) / (dd[2].startsWith('m') ? 60 : 1);
    rest = rest.replace(dd[0], ' ');
    rest = rest.replace(/\b(iv|infusion|over)\b/g, ' ');
  }
  if (rest.trim()) fail(`"${rest.trim()}" was not understood`);
  const doseMg = amount((dose as RegExpExecArray)[1], (dose as RegExpExecArray)[2]);
  if (!(doseMg > 0)) fail('the dose must be > 0');
  if (!(intervalH > 0)) fail('the interval must be > 0');
  if (route === 'infusion' && !(durationH > 0 && durationH < intervalH)) fail('the infusion must be longer than 0 and shorter than the interval');
  if (loadingDoseMg !== undefined && !(loadingDoseMg > 0)) fail('the loading dose must be > 0');
  return { doseMg, intervalH, durationH, route, ...(loadingDoseMg !== undefined ? { loadingDoseMg } : {}) };
}

export function formatRegimen(r: { doseMg: number; intervalH: number; durationH: number; route: Route; loadingDoseMg?: number }): string {
  const how = r.route === 'infusion' ? `over ${r.durationH < 1 ? `${Math.round(r.durationH * 60)} min` : `${r.durationH} h`}` : r.route;
  const load = r.loadingDoseMg !== undefined ? `loading dose ${r.loadingDoseMg} mg, then ` : '';
  return `${load}${r.doseMg} mg every ${r.intervalH} h ${how}`;
}

export interface EvaluationInput {
  model: StructuralModel;
  /** nDraws x nParams, natural scale, model.parameterOrder. */
  draws: Float64Array;
  nDraws: number;
  target: TargetSpec;
  gridIntervals?: number;
}

/** Reusable buffers for many regimens over the same draws. */
export interface EvaluationWorkspace {
  metrics: Float64Array;
  /** Per draw: 1 when toxic (or failed) at steady state, for the last regimen summarised. */
  toxic: Uint8Array;
  column: Float64Array;
  scratch: Float64Array;
  params: Float64Array;
}

export function createWorkspace(nDraws: number, nParams: number): EvaluationWorkspace {
  return { metrics: new Float64Array(nDraws * METRIC_IDS.length), toxic: new Uint8Array(nDraws), column: new Float64Array(nDraws), scratch: new Float64Array(nDraws), params: new Float64Array(nParams) };
}

function thresholdFor(target: TargetSpec): number {
  return metricsNeeded(target).has('ftAbove') ? ftThresholdMgL(target) : NaN;
}

function gridFor(input: EvaluationInput, threshold: number, route: Route): number {
  return input.gridIntervals ?? (Number.isFinite(threshold) || !input.model.analytic || route === 'oral' ? 32 : 2);
}

/** Evaluate one regimen over every draw: probabilities and metric bands at steady state. */
export function evaluateRegimen(input: EvaluationInput, regimen: Regimen, ws?: EvaluationWorkspace): RegimenResult {
  const { model, draws, nDraws, target } = input;
  const nP = model.parameterOrder.length;
  const w = ws ?? createWorkspace(nDraws, nP);
  const threshold = thresholdFor(target);
  const evaluator = buildSteadyStateEvaluator(model, regimen, { peakDelayH: target.peakDelayH ?? 0, thresholdMgL: threshold, gridIntervals: gridFor(input, threshold, regimen.route) });
  const nM = METRIC_IDS.length;
  for (let d = 0; d < nDraws; d++) {
    for (let p = 0; p < nP; p++) w.params[p] = draws[d * nP + p];
    evaluator.evaluate(w.params, w.metrics, d * nM);
  }
  return summarise(input, regimen, w);
}

/**
 * Evaluate many regimens. For dose-linear models the steady-state curve of a unit dose is
 * computed once per (interval, duration, route) and draw, then scaled to each dose
 * (superposition), so the cost grows with the distinct schedules, not the doses.
 */
export function evaluateRegimens(input: EvaluationInput, regimens: readonly Regimen[], toxicOut?: Uint8Array[]): RegimenResult[] {
  const { model, draws, nDraws, target } = input;
  const nP = model.parameterOrder.length;
  const ws = createWorkspace(nDraws, nP);
  if (!isDoseLinear(model))
    return regimens.map((r, i) => {
      const res = evaluateRegimen(input, r, ws);
      if (toxicOut) toxicOut[i] = ws.toxic.slice();
      return res;
    });
  const threshold = thresholdFor(target);
  const groups = new Map<string, number[]>();
  regimens.forEach((r, i) => {
    const key = `${r.intervalH}|${r.route === 'infusion' ? r.durationH : 0}|${r.route}`;
    const g = groups.get(key);
    if (g) g.push(i);
    else groups.set(key, [i]);
  });
  const out: RegimenResult[] = new Array(regimens.length);
  const nM = METRIC_IDS.length;
  const ok = new Uint8Array(nDraws);
  let curves = new Float64Array(0);
  for (const idx of groups.values()) {
    const r0 = regimens[idx[0]];
    const unit = buildSteadyStateEvaluator(model, { ...r0, doseMg: 1 }, { peakDelayH: target.peakDelayH ?? 0, thresholdMgL: threshold, gridIntervals: gridFor(input, threshold, r0.route) });
    const nT = unit.nTimes;
    if (curves.length < nDraws * nT) curves = new Float64Array(nDraws * nT);
    const c = curves.subarray(0, nDraws * nT);
    const one = new Float64Array(nT);
    for (let d = 0; d < nDraws; d++) {
      for (let p = 0; p < nP; p++) ws.params[p] = draws[d * nP + p];
      ok[d] = unit.curve(ws.params, one) ? 1 : 0;
      c.set(one, d * nT);
    }
    // Unit-dose metrics and their bands: every dose-proportional metric of dose D is D times
    // the unit value, so its quantiles are D times the unit quantiles (order is preserved).
    const unitMetrics = new Float64Array(nDraws * nM);
    for (let d = 0; d < nDraws; d++) {
      if (!ok[d]) {
        for (let j = 0; j < nM; j++) unitMetrics[d * nM + j] = NaN;
        continue;
      }
      for (let p = 0; p < nP; p++) ws.params[p] = draws[d * nP + p];
      unit.metricsFromCurve(c, d * nT, 1, ws.params, unitMetrics, d * nM);
    }
    const unitBands: Array<Band | undefined> = METRIC_IDS.map((id, j) => {
      if (id === 'ftAbove') return undefined;
      for (let d = 0; d < nDraws; d++) ws.column[d] = unitMetrics[d * nM + j];
      return bandOf(ws.column, ws.scratch);
    });
    const ftIndex = METRIC_IDS.indexOf('ftAbove');
    const oneMetrics = new Float64Array(nM);
    // Only the columns the probabilities read (column 0 also marks failed draws as NaN).
    const used = [...new Set([0, ...[...target.goals, ...target.toxic].map((g) => METRIC_IDS.indexOf(g.metric))])].filter((j) => j !== ftIndex);
    for (const i of idx) {
      const r = regimens[i];
      const D = r.doseMg;
      for (let d = 0; d < nDraws; d++) {
        const row = d * nM;
        for (const j of used) ws.metrics[row + j] = unitMetrics[row + j] * D;
        if (ok[d] && Number.isFinite(threshold)) {
          for (let p = 0; p < nP; p++) ws.params[p] = draws[d * nP + p];
          unit.metricsFromCurve(c, d * nT, D, ws.params, oneMetrics, 0);
          ws.metrics[row + ftIndex] = oneMetrics[ftIndex];
        }
      }
      out[i] = summarise(input, r, ws, { bands: unitBands, scale: D });
      if (toxicOut) toxicOut[i] = ws.toxic.slice();
    }
  }
  return out;
}

/** Probabilities and bands from the metrics in the workspace (NaN rows = failed draws). */
function summarise(input: EvaluationInput, regimen: Regimen, w: EvaluationWorkspace, scaled?: { bands: Array<Band | undefined>; scale: number }): RegimenResult {
  const { nDraws, target } = input;
  const needed = metricsNeeded(target);
  const threshold = thresholdFor(target);
  const nM = METRIC_IDS.length;
  const goals = target.goals.map((c) => ({ j: METRIC_IDS.indexOf(c.metric), ...resolvedBounds(target, c) }));
  const toxic = target.toxic.map((c) => ({ j: METRIC_IDS.indexOf(c.metric), ...resolvedBounds(target, c) }));
  let ok = 0;
  let hit = 0;
  let tox = 0;
  const m = w.metrics;
  for (let d = 0; d < nDraws; d++) {
    w.toxic[d] = 1;
    if (!(m[d * nM] === m[d * nM])) continue;
    w.toxic[d] = 0;
    ok++;
    let inTarget = true;
    for (const g of goals) {
      const v = m[d * nM + g.j];
      if (!(v >= g.min && v <= g.max)) inTarget = false;
    }
    if (inTarget) hit++;
    for (const c of toxic) {
      if (m[d * nM + c.j] > c.max) {
        tox++;
        w.toxic[d] = 1;
        break;
      }
    }
  }
  const metrics: Partial<Record<MetricId, Band>> = Object.create(null);
  METRIC_IDS.forEach((id, j) => {
    if (id === 'ftAbove' && !Number.isFinite(threshold)) return;
    if (id === 'peakAt' && !needed.has('peakAt') && target.peakDelayH === undefined) return;
    const unitBand = scaled?.bands[j];
    if (unitBand && scaled) {
      const k = scaled.scale;
      metrics[id] = roundBand({ median: unitBand.median * k, mean: unitBand.mean * k, q025: unitBand.q025 * k, q10: unitBand.q10 * k, q90: unitBand.q90 * k, q975: unitBand.q975 * k });
      return;
    }
    for (let d = 0; d < nDraws; d++) w.column[d] = m[d * nM + j];
    metrics[id] = roundBand(bandOf(w.column, w.scratch));
  });
  return {
    doseMg: regimen.doseMg,
    intervalH: regimen.intervalH,
    durationH: regimen.durationH,
    route: regimen.route,
    ...(regimen.loadingDoseMg !== undefined ? { loadingDoseMg: regimen.loadingDoseMg } : {}),
    dailyDoseMg: sig((regimen.doseMg * 24) / regimen.intervalH, 6),
    // A draw the model cannot evaluate (e.g. saturated elimination with no steady state) counts
    // as not attained and as toxic: the conservative reading of an accumulating exposure.
    pTarget: nDraws && goals.length ? hit / nDraws : NaN,
    pToxic: toxic.length ? (nDraws ? (tox + nDraws - ok) / nDraws : NaN) : null,
    metrics,
    failedDraws: nDraws - ok,
  };
}

function roundBand(b: Band): Band {
  return { median: sig(b.median), mean: sig(b.mean), q025: sig(b.q025), q10: sig(b.q10), q90: sig(b.q90), q975: sig(b.q975) };
}

/** Width of the score bands within which candidates count as equal (about 2 Monte Carlo SEs at 2000 draws). */
export const RANK_TIE_WIDTH = 0.02;

export interface RankOptions {
  /** Interval to stay near within a tie band: the current one, else the target's preferred one. */
  preferIntervalH?: number;
  /** Centre of the target range (for the first two-sided goal): within ties, the median nearest it. */
  goalCentre?: { metric: MetricId; value: number };
}

/**
 * Best first by the score P(target) - P(toxic), in bands of RANK_TIE_WIDTH (differences below
 * the Monte Carlo error are not evidence); within a band: the interval nearest the preferred one
 * (fewer changes on the ward), lower P(toxic), the median nearest the centre of the target
 * range, fewer doses a day, the lower daily dose. Bands keep the order transitive.
 */
export function rankRegimens(results: RegimenResult[], options: RankOptions = {}): RegimenResult[] {
  // Bands counted down from the best possible score, 1, so that certain attainment is one band.
  const band = (r: RegimenResult) => Math.floor((1 - ((Number.isFinite(r.pTarget) ? r.pTarget : -1) - (r.pToxic ?? 0))) / RANK_TIE_WIDTH + 1e-9);
  const prefer = options.preferIntervalH;
  const distance = (r: RegimenResult) => (prefer !== undefined ? Math.abs(Math.log(r.intervalH / prefer)) : 0);
  const centre = options.goalCentre;
  const offCentre = (r: RegimenResult) => {
    const m = centre ? r.metrics[centre.metric]?.median : undefined;
    return centre && m !== undefined && Number.isFinite(m) ? Math.abs(Math.log(m / centre.value)) : 0;
  };
  return results.slice().sort((a, b) => {
    const db = band(a) - band(b);
    if (db !== 0) return db;
    const di = distance(a) - distance(b);
    if (Math.abs(di) > 1e-9) return di;
    const dt = (a.pToxic ?? 0) - (b.pToxic ?? 0);
    if (dt !== 0) return dt;
    const dc = offCentre(a) - offCentre(b);
    if (Math.abs(dc) > 1e-9) return dc;
    if (a.intervalH !== b.intervalH) return b.intervalH - a.intervalH;
    return a.dailyDoseMg - b.dailyDoseMg;
  });
}

/** The centre (geometric mean of the bounds) of the target's first two-sided goal. */
export function goalCentreOf(target: TargetSpec): RankOptions['goalCentre'] {
  for (const c of target.goals) {
    const { min, max } = resolvedBounds(target, c);
    if (Number.isFinite(min) && Number.isFinite(max) && min > 0) return { metric: c.metric, value: Math.sqrt(min * max) };
  }
  return undefined;
}

const pct = (p: number) => `${Math.round(100 * p)} %`;

/** One paragraph in plain words for a ranked regimen. */
export function explainRegimen(r: RegimenResult, target: TargetSpec, rank?: number): string {
  const parts: string[] = [];
  parts.push(`${rank !== undefined ? `${rank}. ` : ''}${formatRegimen(r)} (${r.dailyDoseMg} mg a day).`);
  const goals = target.goals.map((c) => describeCondition(target, c)).join(' and ');
  parts.push(`At steady state, ${pct(r.pTarget)} of plausible versions of this patient reach ${goals}`);
  if (r.pToxic !== null) {
    const early = r.pToxicFirstIntervals !== undefined && r.pToxicFirstIntervals !== null && Number.isFinite(r.pToxicFirstIntervals);
    parts.push(`and ${pct(r.pToxic)} have ${target.toxic.map((c) => describeToxic(target, c)).join(' or ')}${early ? ` at steady state or in the first intervals after the change (first intervals alone: ${pct(r.pToxicFirstIntervals as number)})` : ''}.`);
  } else parts[parts.length - 1] += '.';
  const shown = new Set(target.goals.map((c) => c.metric));
  for (const c of target.toxic) shown.add(c.metric);
  for (const id of shown) {
    const b = r.metrics[id];
    if (!b) continue;
    parts.push(`Predicted ${metricLabel(target, id)} at steady state: ${fmt(b.median)} ${METRIC_LABELS[id].unit} (80 % interval ${fmt(b.q10)}-${fmt(b.q90)}).`);
  }
  if (r.loadingNote) parts.push(`${r.loadingNote.charAt(0).toUpperCase()}${r.loadingNote.slice(1)}.`);
  if (r.failedDraws > 0) parts.push(`(${r.failedDraws} draws reach no steady state or could not be evaluated; they count as toxic.)`);
  return parts.join(' ');
}

function fmt(x: number): string {
  if (!Number.isFinite(x)) return String(x);
  return Math.abs(x) >= 100 ? x.toFixed(0) : Math.abs(x) >= 10 ? x.toFixed(1) : x.toFixed(2);
}
