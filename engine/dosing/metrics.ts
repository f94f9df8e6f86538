/**
 * Steady-state exposure metrics of one regimen for many parameter draws. Built once per regimen
 * (the predictor is prepared on a fixed time grid), then run per draw on preallocated arrays.
 * Steady state: the model's own closed form of the infinite dose train (a steady-state dose).
 * AUC over an interval at steady state of a linear model equals F x dose / CL exactly (the
 * superposition principle; Gibaldi & Perrier, Pharmacokinetics, 2nd ed. 1982, from memory);
 * otherwise Simpson's rule on the grid.
 */
import type { Dose, Route } from '../data/types.js';
import type { StructuralModel } from '../models/types.js';
import type { MetricId } from './targets.js';

export interface Regimen {
  doseMg: number;
  intervalH: number;
  /** Infusion duration (h); 0 for a bolus or an oral dose. */
  durationH: number;
  route: Route;
  loadingDoseMg?: number;
}

export const METRIC_IDS: readonly MetricId[] = ['auc24', 'trough', 'peak', 'peakAt', 'ftAbove'];

export interface MetricOptions {
  /** Sampling delay after the end of infusion for peakAt (h). */
  peakDelayH: number;
  /** Total-concentration threshold for ftAbove (mg/L); NaN = not needed. */
  thresholdMgL: number;
  /** Grid intervals per phase (even); more means finer ftAbove and numerical AUC. */
  gridIntervals: number;
}

export interface SteadyStateEvaluator {
  regimen: Regimen;
  /** Number of grid concentrations `curve` writes. */
  nTimes: number;
  /** Concentrations on the evaluator's grid for these parameters; false on model failure. */
  curve(params: Float64Array, conc: Float64Array): boolean;
  /**
   * Metrics (auc24, trough, peak, peakAt, ftAbove in METRIC_IDS order) into out[offset..] from a
   * grid curve computed for `curveDoseMg`, scaled to the regimen's dose (linear models only
   * scale; pass scale 1 otherwise).
   */
  metricsFromCurve(conc: Float64Array, concOffset: number, scale: number, params: Float64Array, out: Float64Array, offset: number): void;
  /** curve then metricsFromCurve at scale 1; false on model failure (metrics NaN). */
  evaluate(params: Float64Array, out: Float64Array, offset: number): boolean;
}

/** Simpson weights on n (even) equal intervals of width h, added into w starting at `from`. */
function addSimpson(w: Float64Array, from: number, n: number, h: number): void {
  for (let i = 0; i <= n; i++) w[from + i] += ((i === 0 || i === n ? 1 : i % 2 === 1 ? 4 : 2) * h) / 3;
}

/** True for models whose concentrations scale with the dose (linear disposition). */
export function isDoseLinear(model: StructuralModel): boolean {
  return model.analytic;
}

export function buildSteadyStateEvaluator(model: StructuralModel, regimen: Regimen, options: MetricOptions): SteadyStateEvaluator {
  const { doseMg, intervalH: tau, route } = regimen;
  const T = route === 'infusion' ? regimen.durationH : 0;
  const n = Math.max(2, options.gridIntervals + (options.gridIntervals % 2));
  const nRise = T > 0 ? n : 0;
  // Grid: [0, T] then [T, tau] (the kink at the end of infusion a node of both), then peakAt.
  const times = new Float64Array(nRise + 1 + n + 1 + 1);
  const weights = new Float64Array(times.length);
  let k = 0;
  if (T > 0) {
    for (let i = 0; i <= nRise; i++) times[k++] = (T * i) / nRise;
    addSimpson(weights, 0, nRise, T / nRise);
  }
  const decayFrom = k;
  for (let i = 0; i <= n; i++) times[k++] = T + ((tau - T) * i) / n;
  // A level at a dose time is pre-dose (catalogue convention): a bolus peak is read just after.
  if (T === 0) times[decayFrom] = 1e-9 * tau;
  addSimpson(weights, decayFrom, n, (tau - T) / n);
  const gridEnd = k;
  const iPeakAt = k;
  times[k++] = Math.min(tau, T + options.peakDelayH);
  const used = k;
  const t = times.subarray(0, used);
  const doses: Dose[] = [{ timeH: 0, amountMg: doseMg, route, durationH: T, steadyStateIntervalH: tau }];
  const predictor = model.prepare(doses, t);
  const own = new Float64Array(used);
  const iPeak = decayFrom;
  const iTrough = gridEnd - 1;
  const clIndex = model.analytic ? model.parameterOrder.indexOf('CL') : -1;
  const fIndex = model.parameterOrder.indexOf('F');
  const threshold = options.thresholdMgL;
  const needFt = Number.isFinite(threshold);
  const oral = route === 'oral';

  const metricsFromCurve = (conc: Float64Array, c0: number, scale: number, params: Float64Array, out: Float64Array, offset: number): void => {
    let auc: number;
    if (clIndex >= 0) {
      const F = oral && fIndex >= 0 ? params[fIndex] : 1;
      auc = (F * doseMg * scale) / params[clIndex];
    } else {
      auc = 0;
      for (let i = 0; i < gridEnd; i++) auc += weights[i] * conc[c0 + i];
      auc *= scale;
    }
    let peak = conc[c0 + iPeak];
    if (oral) for (let i = 0; i < gridEnd; i++) if (conc[c0 + i] > peak) peak = conc[c0 + i];
    let ft = NaN;
    if (needFt) {
      // Time above threshold by linear interpolation of the crossings between grid nodes.
      const thr = threshold / scale;
      let above = 0;
      for (let i = 1; i < gridEnd; i++) {
        const dt = times[i] - times[i - 1];
        if (dt <= 0) continue;
        const a = conc[c0 + i - 1] - thr;
        const b = conc[c0 + i] - thr;
        if (a >= 0 && b >= 0) above += dt;
        else if (a > 0 || b > 0) above += (dt * (a > 0 ? a : b)) / (Math.abs(a) + Math.abs(b));
      }
      ft = (100 * above) / tau;
    }
    out[offset] = (auc * 24) / tau;
    out[offset + 1] = scale * conc[c0 + iTrough];
    out[offset + 2] = scale * peak;
    out[offset + 3] = scale * conc[c0 + iPeakAt];
    out[offset + 4] = ft;
  };
  const curve = (params: Float64Array, conc: Float64Array): boolean => predictor(params, conc);
  const evaluate = (params: Float64Array, out: Float64Array, offset: number): boolean => {
    if (!predictor(params, own)) {
      for (let j = 0; j < 5; j++) out[offset + j] = NaN;
      return false;
    }
    metricsFromCurve(own, 0, 1, params, out, offset);
    return true;
  };
  return { regimen, nTimes: used, curve, metricsFromCurve, evaluate };
}
