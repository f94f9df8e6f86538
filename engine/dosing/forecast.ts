/**
 * Forecast: the concentration curve over the past and a future regimen, per posterior draw,
 * summarised as a median with 80 % and 95 % credible bands; metrics per future dosing interval
 * (trough before the next dose, peak at the end of infusion, AUC over the interval by Simpson's
 * rule); and the time after the last given dose for the level to fall below a threshold.
 */
import type { Dose } from '../data/types.js';
import type { Regimen } from './metrics.js';
import type { PatientPrior } from './prior.js';
import { bandOf, sig, type Band } from './summary.js';
import { resolvedBounds, type TargetSpec } from './targets.js';

export interface CurveBands {
  timesH: number[];
  median: number[];
  q025: number[];
  q10: number[];
  q90: number[];
  q975: number[];
}

export interface IntervalMetrics {
  index: number;
  startH: number;
  endH: number;
  doseMg: number;
  /** Level just before the next dose. */
  trough: Band;
  /** Level at the end of the infusion (just after a bolus). */
  peak: Band;
  /** AUC over the interval (mg.h/L) and scaled to 24 h. */
  auc: Band;
  auc24: Band;
  /** Share of draws with a toxic exposure in this interval (AUC24, trough or peak limits of the target); null without toxic limits. */
  pToxic: number | null;
}

export interface TimeBelow {
  levelMgL: number;
  /** From the end of the last given dose (h); Infinity-free: draws not below within the horizon count as the horizon. */
  fromH: number;
  horizonH: number;
  /** Share of draws already below at fromH. */
  pAlreadyBelow: number;
  /** Share of draws still above at the horizon. */
  pAboveAtHorizon: number;
  hours: Band;
}

export interface Forecast {
  curve: CurveBands;
  futureDoses: Dose[];
  intervals: IntervalMetrics[];
  timeBelow?: TimeBelow;
}

export interface ForecastInput {
  prior: PatientPrior;
  history: readonly Dose[];
  /** eta draws, nDraws x nEta. */
  etaDraws: Float64Array;
  nDraws: number;
  regimen?: Regimen;
  /** Start of the first future dose (h). */
  startH: number;
  /** Future intervals to show metrics for. */
  nIntervals?: number;
  /** Curve points. */
  nPoints?: number;
  /** Compute the time to fall below this level after the last given dose. */
  belowMgL?: number;
  belowHorizonH?: number;
  /** The target whose toxic limits give each interval's pToxic. */
  target?: TargetSpec;
}

/** The future doses of a regimen from startH (the loading dose, when given, replaces the first). */
export function regimenDoses(regimen: Regimen, startH: number, count: number): Dose[] {
  const out: Dose[] = [];
  for (let k = 0; k < count; k++) {
    const amountMg = k === 0 && regimen.loadingDoseMg !== undefined ? regimen.loadingDoseMg : regimen.doseMg;
    out.push({ timeH: startH + k * regimen.intervalH, amountMg, route: regimen.route, durationH: regimen.route === 'infusion' ? regimen.durationH : 0 });
  }
  return out;
}

const GRID = 16;

/** At most this many draws (evenly spaced) enter the curve and interval bands (25 beyond each 2.5 % tail). */
const MAX_CURVE_DRAWS = 1000;

export function forecast(input: ForecastInput): Forecast {
  const { prior, history } = input;
  const stride = Math.max(1, Math.ceil(input.nDraws / MAX_CURVE_DRAWS));
  const nDraws = Math.floor(input.nDraws / stride);
  const etaDraws = stride === 1 ? input.etaDraws : thin(input.etaDraws, prior.nEta, stride, nDraws);
  const d = prior.nEta;
  const nIntervals = input.regimen ? (input.nIntervals ?? 3) : 0;
  const tau = input.regimen?.intervalH ?? 0;
  const futureCount = input.regimen ? nIntervals + Math.ceil(48 / tau) : 0;
  const futureDoses = input.regimen ? regimenDoses(input.regimen, input.startH, futureCount) : [];
  const doses = [...history, ...futureDoses];
  const lastHistory = history.length ? history[history.length - 1] : undefined;
  const endH = input.regimen ? input.startH + nIntervals * tau + 12 : Math.max(input.startH, (lastHistory ? lastHistory.timeH : 0) + 24);
  const nPoints = input.nPoints ?? 145;
  const times: number[] = [];
  for (let i = 0; i < nPoints; i++) times.push((endH * i) / (nPoints - 1));
  // Per-interval nodes: Simpson grids on [start, end of infusion] and [end of infusion, next dose].
  const intervalIndex: Array<{ start: number; from: number; rise: number; decay: number; T: number; doseMg: number }> = [];
  for (let k = 0; k < nIntervals; k++) {
    const dose = futureDoses[k];
    const s = dose.timeH;
    const T = dose.durationH;
    const from = times.length;
    const rise = T > 0 ? GRID : 0;
    for (let i = 0; i <= rise; i++) times.push(s + (T * i) / GRID);
    const decayStart = T > 0 ? s + T : s + 1e-9 * tau;
    for (let i = 0; i <= GRID; i++) times.push(i === 0 ? decayStart : s + T + ((tau - T) * i) / GRID);
    intervalIndex.push({ start: s, from, rise, decay: GRID, T, doseMg: dose.amountMg });
  }
  const nT = times.length;
  const predictor = prior.model.prepare(doses, times);
  const params = new Float64Array(prior.model.parameterOrder.length);
  const conc = new Float64Array(nT);
  const all = new Float64Array(nDraws * nT).fill(NaN);
  const eta = new Float64Array(d);
  for (let k = 0; k < nDraws; k++) {
    for (let i = 0; i < d; i++) eta[i] = etaDraws[k * d + i];
    if (!prior.toModelVector(eta, params) || !predictor(params, conc)) continue;
    all.set(conc, k * nT);
  }
  const col = new Float64Array(nDraws);
  const scratch = new Float64Array(nDraws);
  const curve: CurveBands = { timesH: [], median: [], q025: [], q10: [], q90: [], q975: [] };
  for (let i = 0; i < nPoints; i++) {
    for (let k = 0; k < nDraws; k++) col[k] = all[k * nT + i];
    const b = bandOf(col, scratch);
    curve.timesH.push(sig(times[i], 6));
    curve.median.push(sig(b.median));
    curve.q025.push(sig(b.q025));
    curve.q10.push(sig(b.q10));
    curve.q90.push(sig(b.q90));
    curve.q975.push(sig(b.q975));
  }
  const intervals: IntervalMetrics[] = [];
  const trough = new Float64Array(nDraws);
  const peak = new Float64Array(nDraws);
  const auc = new Float64Array(nDraws);
  const auc24 = new Float64Array(nDraws);
  intervalIndex.forEach((iv, k) => {
    const hRise = iv.T / GRID;
    const hDecay = (tau - iv.T) / GRID;
    for (let m = 0; m < nDraws; m++) {
      const base = m * nT + iv.from;
      let a = 0;
      for (let i = 0; i <= iv.rise; i++) a += ((i === 0 || i === iv.rise ? 1 : i % 2 ? 4 : 2) * hRise * all[base + i]) / 3;
      const decayBase = base + (iv.rise > 0 ? iv.rise + 1 : 0);
      for (let i = 0; i <= GRID; i++) a += ((i === 0 || i === GRID ? 1 : i % 2 ? 4 : 2) * hDecay * all[decayBase + i]) / 3;
      auc[m] = a;
      auc24[m] = (a * 24) / tau;
      peak[m] = all[decayBase];
      trough[m] = all[decayBase + GRID];
    }
    const r = (b: Band): Band => ({ median: sig(b.median), mean: sig(b.mean), q025: sig(b.q025), q10: sig(b.q10), q90: sig(b.q90), q975: sig(b.q975) });
    // peakAt and ftAbove limits are read at steady state only; the interval check covers AUC24, trough and peak.
    const tox = (input.target?.toxic ?? []).filter((c) => c.metric === 'auc24' || c.metric === 'trough' || c.metric === 'peak').map((c) => ({ metric: c.metric, max: resolvedBounds(input.target as TargetSpec, c).max }));
    let nTox = 0;
    for (let m = 0; m < nDraws; m++) {
      const v = { auc24: auc24[m], trough: trough[m], peak: peak[m] } as Record<string, number>;
      if (tox.some((t) => !(v[t.metric] <= t.max))) nTox++;
    }
    intervals.push({ index: k + 1, startH: sig(iv.start, 6), endH: sig(iv.start + tau, 6), doseMg: iv.doseMg, trough: r(bandOf(trough, scratch)), peak: r(bandOf(peak, scratch)), auc: r(bandOf(auc, scratch)), auc24: r(bandOf(auc24, scratch)), pToxic: tox.length && nDraws ? sig(nTox / nDraws, 4) : null });
  });
  const result: Forecast = { curve, futureDoses, intervals };
  if (input.belowMgL !== undefined && lastHistory) result.timeBelow = timeToFallBelow(prior, history, etaDraws, nDraws, input.belowMgL, input.belowHorizonH ?? 120);
  return result;
}

function thin(eta: Float64Array, d: number, stride: number, n: number): Float64Array {
  const out = new Float64Array(n * d);
  for (let k = 0; k < n; k++) for (let i = 0; i < d; i++) out[k * d + i] = eta[k * stride * d + i];
  return out;
}

/** Time after the end of the last given dose (no further dose) for the level to fall below `levelMgL`. */
export function timeToFallBelow(prior: PatientPrior, history: readonly Dose[], etaDraws: Float64Array, nDraws: number, levelMgL: number, horizonH: number): TimeBelow {
  const last = history[history.length - 1];
  const fromH = last.timeH + last.durationH + (last.durationH === 0 ? 1e-9 : 0);
  const step = 0.25;
  const n = Math.ceil(horizonH / step) + 1;
  const times = Float64Array.from({ length: n }, (_, i) => fromH + i * step);
  const predictor = prior.model.prepare(history, times);
  const params = new Float64Array(prior.model.parameterOrder.length);
  const conc = new Float64Array(n);
  const eta = new Float64Array(prior.nEta);
  const hours = new Float64Array(nDraws).fill(NaN);
  let already = 0;
  let above = 0;
  let ok = 0;
  for (let k = 0; k < nDraws; k++) {
    for (let i = 0; i < prior.nEta; i++) eta[i] = etaDraws[k * prior.nEta + i];
    if (!prior.toModelVector(eta, params) || !predictor(params, conc)) continue;
    ok++;
    if (conc[0] < levelMgL) {
      already++;
      hours[k] = 0;
      continue;
    }
    let h = horizonH;
    let found = false;
    for (let i = 1; i < n; i++) {
      if (conc[i] < levelMgL) {
        const f = (conc[i - 1] - levelMgL) / (conc[i - 1] - conc[i]);
        h = (i - 1 + f) * step;
        found = true;
        break;
      }
    }
    if (!found) above++;
    hours[k] = h;
  }
  const b = bandOf(hours, new Float64Array(nDraws));
  return {
    levelMgL,
    fromH: sig(fromH, 6),
    horizonH,
    pAlreadyBelow: ok ? already / ok : NaN,
    pAboveAtHorizon: ok ? above / ok : NaN,
    hours: { median: sig(b.median), mean: sig(b.mean), q025: sig(b.q025), q10: sig(b.q10), q90: sig(b.q90), q975: sig(b.q975) },
  };
}
