/**
 * The merged event/output schedule of one dosing history and one set of output times, built
 * once by `prepare` and walked by every evaluation of the predictor.
 *
 * Conventions (documented in the catalogue as well):
 * - Ties at one time are ordered: steady-state reset, then outputs, then doses. So a level
 *   sampled at exactly a dose time is the level BEFORE that dose (the TDM convention: a trough
 *   drawn "at" the dose time is pre-dose), and a level at a steady-state dose time is the
 *   steady-state trough.
 * - Oral doses enter the depot at time + tlag. tlag is a parameter, so oral entries are kept in
 *   a separate sorted stream (order is kept by a constant shift) and merged while walking.
 * - A steady-state dose resets the state of every compartment (common practice): doses given
 *   before it stop counting, including the rest of running infusions and oral doses still in
 *   their lag time. Each record carries an epoch (number of steady-state doses at or before its
 *   time); events of an older epoch than the last reset are skipped.
 */
import type { Dose } from '../data/types.js';

export const EV_RESET = 0;
export const EV_OUTPUT = 1;
export const EV_BOLUS = 2;
export const EV_INF_START = 3;
export const EV_INF_STOP = 4;

export const ROUTE_BOLUS = 0;
export const ROUTE_INFUSION = 1;
export const ROUTE_ORAL = 2;

export interface Schedule {
  /** Static stream: resets, outputs, boluses, infusion starts and stops, sorted. */
  n: number;
  timeH: Float64Array;
  kind: Int32Array;
  /** Bolus: amount (mg); infusion start/stop: rate (mg/h); output: index into `out`; reset: dose index. */
  value: Float64Array;
  epoch: Int32Array;
  nOutputs: number;
  /** Oral stream, sorted by dose time (entry = dose time + tlag). */
  nOral: number;
  oralTimeH: Float64Array;
  oralAmountMg: Float64Array;
  oralEpoch: Int32Array;
  hasOral: boolean;
  /**
   * Per dose record, read only by steady-state resets: without a steady-state dose these are one
   * shared empty array each (every typed array costs about 180 bytes of heap however short).
   */
  doseRoute: Int32Array;
  doseAmountMg: Float64Array;
  doseDurationH: Float64Array;
  doseIntervalH: Float64Array;
  /** Latest output time (h). */
  lastOutputH: number;
}

const NO_INTEGERS = new Int32Array(0);
const NO_NUMBERS = new Float64Array(0);

function where(d: Dose, i: number): string {
  return d.sourceRow !== undefined ? `dose ${i + 1} (row ${d.sourceRow})` : `dose ${i + 1}`;
}

/** Checks the history (cheaply; createDataset has done the full job) and builds the schedule. */
export function buildSchedule(doses: readonly Dose[], timesH: ArrayLike<number>): Schedule {
  const nd = doses.length;
  for (let i = 0; i < nd; i++) {
    const d = doses[i];
    if (!(Number.isFinite(d.timeH) && d.timeH >= 0)) throw new Error(`${where(d, i)}: time must be a number >= 0 h, got ${d.timeH}`);
    if (!(Number.isFinite(d.amountMg) && d.amountMg > 0)) throw new Error(`${where(d, i)}: amount must be a number > 0 mg, got ${d.amountMg}`);
    if (d.route !== 'bolus' && d.route !== 'infusion' && d.route !== 'oral') throw new Error(`${where(d, i)}: unknown route "${String(d.route)}" (bolus, infusion or oral)`);
    if (d.route === 'infusion' && !(Number.isFinite(d.durationH) && d.durationH > 0))
      throw new Error(`${where(d, i)}: an infusion needs a duration > 0 h, got ${d.durationH}`);
    const tau = d.steadyStateIntervalH;
    if (tau !== undefined) {
      if (!(Number.isFinite(tau) && tau > 0)) throw new Error(`${where(d, i)}: steady-state interval must be > 0 h, got ${tau}`);
      if (d.route === 'infusion' && d.durationH > tau) throw new Error(`${where(d, i)}: a steady-state infusion must not be longer than its interval`);
    }
  }
  const nt = timesH.length;
  for (let j = 0; j < nt; j++) {
    const t = timesH[j];
    if (!(Number.isFinite(t) && t >= 0)) throw new Error(`output time ${j + 1}: must be a number >= 0 h, got ${t}`);
  }

  const ssTimes = doses.filter((d) => d.steadyStateIntervalH !== undefined).map((d) => d.timeH).sort((a, b) => a - b);
  const epochOf = (t: number): number => {
    let k = 0;
    while (k < ssTimes.length && ssTimes[k] <= t) k++;
    return k;
  };

  interface Ev { t: number; kind: number; value: number; epoch: number; order: number }
  const evs: Ev[] = [];
  const oral: { t: number; amount: number; epoch: number; order: number }[] = [];
  const withResets = ssTimes.length > 0;
  const doseRoute = withResets ? new Int32Array(nd) : NO_INTEGERS;
  const doseAmountMg = withResets ? new Float64Array(nd) : NO_NUMBERS;
  const doseDurationH = withResets ? new Float64Array(nd) : NO_NUMBERS;
  const doseIntervalH = withResets ? new Float64Array(nd) : NO_NUMBERS;
  let order = 0;
  for (let i = 0; i < nd; i++) {
    const d = doses[i];
    const epoch = epochOf(d.timeH);
    if (withResets) {
      doseRoute[i] = d.route === 'bolus' ? ROUTE_BOLUS : d.route === 'infusion' ? ROUTE_INFUSION : ROUTE_ORAL;
      doseAmountMg[i] = d.amountMg;
      doseDurationH[i] = d.route === 'infusion' ? d.durationH : 0;
      doseIntervalH[i] = d.steadyStateIntervalH ?? 0;
    }
    if (d.steadyStateIntervalH !== undefined) evs.push({ t: d.timeH, kind: EV_RESET, value: i, epoch, order: order++ });
    if (d.route === 'bolus') evs.push({ t: d.timeH, kind: EV_BOLUS, value: d.amountMg, epoch, order: order++ });
    else if (d.route === 'infusion') {
      const rate = d.amountMg / d.durationH;
      evs.push({ t: d.timeH, kind: EV_INF_START, value: rate, epoch, order: order++ });
      evs.push({ t: d.timeH + d.durationH, kind: EV_INF_STOP, value: rate, epoch, order: order++ });
    } else oral.push({ t: d.timeH, amount: d.amountMg, epoch, order: order++ });
  }
  let lastOutputH = 0;
  for (let j = 0; j < nt; j++) {
    evs.push({ t: timesH[j], kind: EV_OUTPUT, value: j, epoch: 0, order: order++ });
    if (timesH[j] > lastOutputH) lastOutputH = timesH[j];
  }
  // Reset < output < dose events at one time; source order otherwise.
  const rank = (k: number): number => (k === EV_RESET ? 0 : k === EV_OUTPUT ? 1 : 2);
  evs.sort((a, b) => a.t - b.t || rank(a.kind) - rank(b.kind) || a.order - b.order);
  oral.sort((a, b) => a.t - b.t || a.order - b.order);

  const n = evs.length;
  const s: Schedule = {
    n,
    timeH: new Float64Array(n),
    kind: new Int32Array(n),
    value: new Float64Array(n),
    epoch: new Int32Array(n),
    nOutputs: nt,
    nOral: oral.length,
    oralTimeH: new Float64Array(oral.length),
    oralAmountMg: new Float64Array(oral.length),
    oralEpoch: new Int32Array(oral.length),
    hasOral: oral.length > 0,
    doseRoute,
    doseAmountMg,
    doseDurationH,
    doseIntervalH,
    lastOutputH,
  };
  for (let k = 0; k < n; k++) {
    s.timeH[k] = evs[k].t;
    s.kind[k] = evs[k].kind;
    s.value[k] = evs[k].value;
    s.epoch[k] = evs[k].epoch;
  }
  for (let k = 0; k < oral.length; k++) {
    s.oralTimeH[k] = oral[k].t;
    s.oralAmountMg[k] = oral[k].amount;
    s.oralEpoch[k] = oral[k].epoch;
  }
  return s;
}
