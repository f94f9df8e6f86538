/**
 * Exposure away from steady state: now (over the last 24 h before the next dose, from the dose
 * history alone), and in the first dosing intervals after a change of regimen (with the drug
 * already on board and any loading dose). Steady-state probabilities alone miss an overshoot in
 * the first intervals; these are the same intervals the forecast shows.
 *
 * For dose-linear models the future is the history's curve plus the first future dose times a
 * unit-dose curve plus the maintenance dose times the unit curve of the later doses
 * (superposition), computed once per interval and duration; other models are solved per regimen.
 */
import type { Dose } from '../data/types.js';
import type { StructuralModel } from '../models/types.js';
import { regimenDoses } from './forecast.js';
import type { Regimen } from './metrics.js';
import { isDoseLinear } from './metrics.js';
import { bandOf, sig, type Band } from './summary.js';
import { metricLabel, metricUnit, resolvedBounds, type MetricId, type TargetSpec } from './targets.js';

/** Future intervals whose exposure enters P(toxic) besides steady state (the forecast shows as many). */
export const EARLY_INTERVALS = 3;
const GRID = 16;

interface Grid {
  times: number[];
  /** Per interval: first node, rise nodes (0 for a bolus), decay nodes, peakAt node. */
  intervals: Array<{ from: number; rise: number; T: number; peakAt: number }>;
}

function intervalGrid(startH: number, regimen: Regimen, n: number, peakDelayH: number): Grid {
  const tau = regimen.intervalH;
  const T = regimen.route === 'infusion' ? regimen.durationH : 0;
  const times: number[] = [];
  const intervals: Grid['intervals'] = [];
  for (let k = 0; k < n; k++) {
    const s = startH + k * tau;
    const from = times.length;
    const rise = T > 0 ? GRID : 0;
    for (let i = 0; i <= rise; i++) times.push(s + (T * i) / GRID);
    for (let i = 0; i <= GRID; i++) times.push(i === 0 ? (T > 0 ? s + T : s + 1e-9 * tau) : s + T + ((tau - T) * i) / GRID);
    times.push(Math.min(s + T + peakDelayH, s + tau));
    intervals.push({ from, rise, T, peakAt: times.length - 1 });
  }
  return { times, intervals };
}

/** Which metrics a check needs (the others are not computed). */
interface Needs {
  auc24: boolean;
  trough: boolean;
  peak: boolean;
  peakAt: boolean;
  ftAbove: boolean;
}

/** Metrics of one interval from concentrations on its grid nodes (only those in `needs`). */
function intervalMetrics(c: ArrayLike<number>, iv: Grid['intervals'][number], tau: number, threshold: number, out: Record<MetricId, number>, needs: Needs): void {
  const d0 = iv.from + (iv.rise > 0 ? iv.rise + 1 : 0);
  out.peak = c[d0];
  out.trough = c[d0 + GRID];
  out.peakAt = c[iv.peakAt];
  if (!needs.auc24 && !needs.ftAbove) return;
  const hRise = iv.T / GRID;
  const hDecay = (tau - iv.T) / GRID;
  let a = 0;
  let above = 0;
  for (let i = 0; i <= iv.rise; i++) a += ((i === 0 || i === iv.rise ? 1 : i % 2 ? 4 : 2) * hRise * c[iv.from + i]) / 3;
  for (let i = 0; i <= GRID; i++) {
    a += ((i === 0 || i === GRID ? 1 : i % 2 ? 4 : 2) * hDecay * c[d0 + i]) / 3;
    if (i < GRID && c[d0 + i] > threshold) above += hDecay;
  }
  out.auc24 = (a * 24) / tau;
  out.ftAbove = (100 * (above + (c[iv.from] > threshold ? iv.T : 0))) / tau;
}

/** Grid nodes a check reads: all of them for AUC or time above a threshold, else peaks and troughs. */
function nodesNeeded(grid: Grid, needs: Needs): Int32Array {
  if (needs.auc24 || needs.ftAbove) return Int32Array.from(grid.times, (_, i) => i);
  const out: number[] = [];
  for (const iv of grid.intervals) {
    const d0 = iv.from + (iv.rise > 0 ? iv.rise + 1 : 0);
    out.push(d0, d0 + GRID, iv.peakAt);
  }
  return Int32Array.from(out);
}

function toxicConditions(target: TargetSpec) {
  return target.toxic.map((c) => ({ metric: c.metric, max: resolvedBounds(target, c).max }));
}

export interface EarlyToxicity {
  /** P(toxic in any of the first EARLY_INTERVALS intervals). */
  pToxicEarly: number;
  /** P(toxic at steady state or in any of the first intervals): the P(toxic) the advice reports. */
  pToxicAny: number;
}

export interface EarlyInput {
  model: StructuralModel;
  /** nDraws x nParams, natural scale. */
  draws: Float64Array;
  nDraws: number;
  history: readonly Dose[];
  startH: number;
  target: TargetSpec;
  threshold: number;
}

/**
 * Early-interval toxicity of each regimen, united per draw with its steady-state toxic flags
 * (a failed draw counts as toxic, as at steady state).
 */
export function earlyToxicity(input: EarlyInput, regimens: readonly Regimen[], steadyToxic: readonly Uint8Array[]): EarlyToxicity[] {
  const { model, draws, nDraws, target } = input;
  const nP = model.parameterOrder.length;
  const tox = toxicConditions(target);
  const out: EarlyToxicity[] = new Array(regimens.length);
  if (tox.length === 0) {
    regimens.forEach((_, i) => (out[i] = { pToxicEarly: NaN, pToxicAny: NaN }));
    return out;
  }
  const params = new Float64Array(nP);
  const m = { auc24: 0, trough: 0, peak: 0, peakAt: 0, ftAbove: 0 } as Record<MetricId, number>;
  const needs: Needs = { auc24: false, trough: false, peak: false, peakAt: false, ftAbove: false };
  for (const t of tox) needs[t.metric] = true;
  const toxMetric = tox.map((t) => t.metric);
  const toxMax = Float64Array.from(tox, (t) => t.max);
  const peakDelayH = target.peakDelayH ?? 0;
  const finish = (i: number, early: Uint8Array) => {
    let e = 0;
    let any = 0;
    for (let d = 0; d < nDraws; d++) {
      if (early[d]) e++;
      if (early[d] || steadyToxic[i]?.[d]) any++;
    }
    out[i] = { pToxicEarly: nDraws ? e / nDraws : NaN, pToxicAny: nDraws ? any / nDraws : NaN };
  };
  const isToxic = (c: Float64Array, grid: Grid, tau: number) => {
    for (let k = 0; k < grid.intervals.length; k++) {
      intervalMetrics(c, grid.intervals[k], tau, input.threshold, m, needs);
      for (let j = 0; j < toxMetric.length; j++) if (!(m[toxMetric[j]] <= toxMax[j])) return true;
    }
    return false;
  };
  if (!isDoseLinear(model)) {
    regimens.forEach((r, i) => {
      const grid = intervalGrid(input.startH, r, EARLY_INTERVALS, peakDelayH);
      const predictor = model.prepare([...input.history, ...regimenDoses(r, input.startH, EARLY_INTERVALS + 1)], grid.times);
      const c = new Float64Array(grid.times.length);
      const early = new Uint8Array(nDraws);
      for (let d = 0; d < nDraws; d++) {
        for (let p = 0; p < nP; p++) params[p] = draws[d * nP + p];
        early[d] = !predictor(params, c) || isToxic(c, grid, r.intervalH) ? 1 : 0;
      }
      finish(i, early);
    });
    return out;
  }
  // Superposition: history + first dose x unit curve + maintenance dose x unit curve of the rest.
  const groups = new Map<string, number[]>();
  regimens.forEach((r, i) => {
    const key = `${r.intervalH}|${r.route === 'infusion' ? r.durationH : 0}|${r.route}`;
    const g = groups.get(key);
    if (g) g.push(i);
    else groups.set(key, [i]);
  });
  // Buffers reused across groups (one grid size per rise / no rise).
  let hist = new Float64Array(0);
  let first = new Float64Array(0);
  let rest = new Float64Array(0);
  const ok = new Uint8Array(nDraws);
  const early = new Uint8Array(nDraws);
  for (const idx of groups.values()) {
    const r0 = regimens[idx[0]];
    const grid = intervalGrid(input.startH, r0, EARLY_INTERVALS, peakDelayH);
    const nodes = nodesNeeded(grid, needs);
    const times = Array.from(nodes, (i) => grid.times[i]);
    const nN = nodes.length;
    const nT = grid.times.length;
    const unit = regimenDoses({ ...r0, doseMg: 1, loadingDoseMg: undefined }, input.startH, EARLY_INTERVALS + 1);
    const pHist = model.prepare(input.history, times);
    const pFirst = model.prepare(unit.slice(0, 1), times);
    const pRest = model.prepare(unit.slice(1), times);
    if (hist.length < nDraws * nN) {
      hist = new Float64Array(nDraws * nN);
      first = new Float64Array(nDraws * nN);
      rest = new Float64Array(nDraws * nN);
    }
    const h1 = new Float64Array(nN);
    const f1 = new Float64Array(nN);
    const r1 = new Float64Array(nN);
    for (let d = 0; d < nDraws; d++) {
      for (let p = 0; p < nP; p++) params[p] = draws[d * nP + p];
      ok[d] = pHist(params, h1) && pFirst(params, f1) && pRest(params, r1) ? 1 : 0;
      hist.set(h1, d * nN);
      first.set(f1, d * nN);
      rest.set(r1, d * nN);
    }
    const c = new Float64Array(nT);
    for (const i of idx) {
      const r = regimens[i];
      const D = r.doseMg;
      const L = r.loadingDoseMg ?? D;
      for (let d = 0; d < nDraws; d++) {
        if (!ok[d]) {
          early[d] = 1;
          continue;
        }
        const o = d * nN;
        for (let t = 0; t < nN; t++) c[nodes[t]] = hist[o + t] + L * first[o + t] + D * rest[o + t];
        early[d] = isToxic(c, grid, r.intervalH) ? 1 : 0;
      }
      finish(i, early);
    }
  }
  return out;
}

export interface ExposureNow {
  /** The 24 h window before the next dose (h from the first dose). */
  fromH: number;
  toH: number;
  /** Level just before the next dose, highest level in the window, AUC over the window. */
  levelAtNextDose: Band;
  highest: Band;
  auc24: Band;
  /** P(the exposure now exceeds a toxic limit of the target); null without toxic limits. */
  pToxic: number | null;
  /** The toxic limits exceeded by the median exposure now, in words. */
  exceeded: string[];
}

/**
 * Exposure from the doses already given, over the 24 h before the next dose: the toxic limits are
 * read as for one interval (AUC24 against AUC24, trough against the level at the next dose,
 * peaks against the highest level).
 */
export function exposureNow(model: StructuralModel, draws: Float64Array, nDraws: number, history: readonly Dose[], nextH: number, target: TargetSpec): ExposureNow {
  const nP = model.parameterOrder.length;
  const fromH = Math.max(0, nextH - 24);
  const n = 97;
  const times = Array.from({ length: n }, (_, i) => fromH + ((nextH - fromH) * i) / (n - 1));
  const predictor = model.prepare(history, times);
  const params = new Float64Array(nP);
  const c = new Float64Array(n);
  const level = new Float64Array(nDraws).fill(NaN);
  const high = new Float64Array(nDraws).fill(NaN);
  const auc = new Float64Array(nDraws).fill(NaN);
  const h = (nextH - fromH) / (n - 1);
  const tox = toxicConditions(target);
  let toxic = 0;
  for (let d = 0; d < nDraws; d++) {
    for (let p = 0; p < nP; p++) params[p] = draws[d * nP + p];
    if (!predictor(params, c)) {
      toxic++;
      continue;
    }
    let a = 0;
    let mx = -Infinity;
    for (let i = 0; i < n; i++) {
      a += ((i === 0 || i === n - 1 ? 1 : i % 2 ? 4 : 2) * h * c[i]) / 3;
      if (c[i] > mx) mx = c[i];
    }
    level[d] = c[n - 1];
    high[d] = mx;
    auc[d] = nextH - fromH > 0 ? (a * 24) / (nextH - fromH) : 0;
    if (tox.some((t) => !(valueFor(t.metric, level[d], high[d], auc[d]) <= t.max))) toxic++;
  }
  const scratch = new Float64Array(nDraws);
  const r = (b: Band): Band => ({ median: sig(b.median), mean: sig(b.mean), q025: sig(b.q025), q10: sig(b.q10), q90: sig(b.q90), q975: sig(b.q975) });
  const levelB = r(bandOf(level, scratch));
  const highB = r(bandOf(high, scratch));
  const aucB = r(bandOf(auc, scratch));
  const exceeded: string[] = [];
  for (const t of tox) {
    const v = valueFor(t.metric, levelB.median, highB.median, aucB.median);
    if (v > t.max) exceeded.push(`${metricLabel(target, t.metric)} ${sig(v, 3)} ${metricUnit(t.metric)} above the toxic limit ${sig(t.max, 3)} ${metricUnit(t.metric)}`);
  }
  return { fromH: sig(fromH, 6), toH: sig(nextH, 6), levelAtNextDose: levelB, highest: highB, auc24: aucB, pToxic: tox.length ? (nDraws ? toxic / nDraws : NaN) : null, exceeded };
}

function valueFor(metric: MetricId, level: number, high: number, auc24: number): number {
  return metric === 'auc24' ? auc24 : metric === 'trough' ? level : metric === 'ftAbove' ? NaN : high;
}

/**
 * Loading dose at the MAP: the first dose that brings the first peak, on top of the drug already
 * on board, to the steady-state peak. Indicated only when that dose exceeds the maintenance dose
 * by at least LOADING_MIN_RATIO (else the patient already has enough drug on board).
 */
export const LOADING_MIN_RATIO = 1.25;

export interface LoadingDecision {
  loadingDoseMg?: number;
  /** First peak (MAP) with the loading dose (or the maintenance dose), and the steady-state peak. */
  firstPeakMgL: number;
  steadyPeakMgL: number;
  reason: string;
}

export function loadingDoseAtMap(model: StructuralModel, mapParams: Float64Array, history: readonly Dose[], startH: number, r: Regimen, strengthMg: number, maxDoseMg: number): LoadingDecision {
  const T = r.route === 'infusion' ? r.durationH : 0;
  const tPeak = startH + (T > 0 ? T : 1e-9);
  // Steady-state peak: a long train of the maintenance dose with no history.
  const nSS = 60;
  const train = regimenDoses({ ...r, loadingDoseMg: undefined }, 0, nSS);
  const ss = new Float64Array(1);
  const hist = new Float64Array(1);
  const unit = new Float64Array(1);
  const ok =
    model.prepare(train, [(nSS - 1) * r.intervalH + (T > 0 ? T : 1e-9)])(mapParams, ss) &&
    model.prepare(history, [tPeak])(mapParams, hist) &&
    model.prepare([{ timeH: startH, amountMg: 1, route: r.route, durationH: T }], [tPeak])(mapParams, unit);
  if (!ok || !(unit[0] > 0) || !Number.isFinite(ss[0])) return { firstPeakMgL: NaN, steadyPeakMgL: NaN, reason: 'the model could not predict the first peak; no loading dose' };
  const needed = (ss[0] - hist[0]) / unit[0];
  const withMaintenance = hist[0] + r.doseMg * unit[0];
  if (!(needed >= LOADING_MIN_RATIO * r.doseMg))
    return {
      firstPeakMgL: sig(withMaintenance, 3),
      steadyPeakMgL: sig(ss[0], 3),
      reason: `no loading dose: with the drug already on board the first peak of ${r.doseMg} mg is predicted at ${sig(withMaintenance, 3)} mg/L against a steady-state peak of ${sig(ss[0], 3)} mg/L`,
    };
  const ld = Math.min(Math.round(needed / strengthMg) * strengthMg, maxDoseMg);
  if (!(ld > r.doseMg))
    return { firstPeakMgL: sig(withMaintenance, 3), steadyPeakMgL: sig(ss[0], 3), reason: `no loading dose: the dose it would need is capped at the maximum dose ${maxDoseMg} mg, no more than the maintenance dose` };
  const firstPeak = hist[0] + ld * unit[0];
  return {
    loadingDoseMg: ld,
    firstPeakMgL: sig(firstPeak, 3),
    steadyPeakMgL: sig(ss[0], 3),
    reason: `loading dose ${ld} mg: the first peak is predicted at ${sig(firstPeak, 3)} mg/L (most likely parameters) against a steady-state peak of ${sig(ss[0], 3)} mg/L${hist[0] > 0.05 * ss[0] ? `, counting ${sig(hist[0], 3)} mg/L already on board` : ''}`,
  };
}
