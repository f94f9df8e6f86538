/**
 * Linear mammillary 1/2/3-compartment models, solved analytically from event to event.
 *
 * Method: every input (bolus, infusion, depot outflow) enters the central compartment and the
 * output is the central concentration, so the central amount is a sum of independent modes,
 * A_c(t) = sum_i r_i z_i(t), where -lambda_i are the eigenvalues of the disposition matrix and
 * r_i the residues of the central impulse response (sum r_i = 1; e.g. Gibaldi & Perrier,
 * Pharmacokinetics 2nd ed. 1982, ch. 2-3, macro-constants from micro-constants). Each mode obeys
 * dz_i/dt = -lambda_i z_i + input(t), and the depot da/dt = -ka a, so an interval of length dt
 * is an exact scalar transition per mode: z_i <- e^{-lambda_i dt} z_i + R (1 - e^{-lambda_i dt})
 * / lambda_i + ka a (e^{-lambda_i dt} - e^{-ka dt}) / (ka - lambda_i). The last factor is taken in
 * an expm1-based divided-difference form when ka is near lambda_i, so ka = k is exact.
 * Cost per evaluation: O(events + outputs).
 *
 * Steady state (Dose.steadyStateIntervalH = tau): the state just before the dose is the fixed
 * point of the one-interval map, x_ss = (I - M)^{-1} x_1 with M the transition over tau
 * (diagonal per mode, triangular with the depot), x_1 the state one interval after a single dose
 * from zero. With an oral lag the train is shifted by tlag; doses of the train still inside
 * their lag time at the reset (only when tlag > tau) are re-entered on time.
 */
import type { Dose } from '../data/types.js';
import type { Predictor, SolverSettings } from './types.js';
import {
  buildSchedule,
  EV_BOLUS,
  EV_INF_START,
  EV_INF_STOP,
  EV_OUTPUT,
  EV_RESET,
  ROUTE_BOLUS,
  ROUTE_INFUSION,
  type Schedule,
} from './schedule.js';

/** Maximum number of train doses still in their lag time at a steady-state reset. */
const MAX_PENDING = 10_000;

/** (1 - e^{-x}) / x, exact at and near 0. */
function oneMinusExpOver(x: number): number {
  return x === 0 ? 1 : -Math.expm1(-x) / x;
}

/**
 * (e^{-l dt} - e^{-ka dt}) / (ka - l), given el = e^{-l dt} and ea = e^{-ka dt}. When
 * |ka - l| dt is small the difference quotient is rewritten as e^{-min dt} dt (1 - e^{-d})/d.
 * The reference form: the hot paths below write the same expression out inline (a call that
 * returns a double may box it), so change them together.
 */
export function expDivDiff(l: number, ka: number, dt: number, el: number, ea: number): number {
  const d = (ka - l) * dt;
  if (d > 0.5 || d < -0.5) return (el - ea) / (ka - l);
  return d >= 0 ? el * dt * oneMinusExpOver(d) : ea * dt * oneMinusExpOver(-d);
}

/** Scratch cell layout shared by the walk and its helpers (doubles passed through a typed array are never boxed). */
const KA = 0;
const TLAG = 1;
const BIO = 2;
const RATE = 3;
const DT = 4;
const TIME = 5;

/**
 * Advance the modal state s (modes 0..n-1, depot at s[n]) by cur[DT] hours with the infusion
 * rate cur[RATE] (mg/h) into the central compartment and absorption rate cur[KA].
 */
function advance(s: Float64Array, n: number, lam: Float64Array, cur: Float64Array): void {
  const ka = cur[KA];
  const rate = cur[RATE];
  const dt = cur[DT];
  const a = s[n];
  const ea = a !== 0 ? Math.exp(-ka * dt) : 0;
  for (let i = 0; i < n; i++) {
    const l = lam[i];
    const x = l * dt;
    const e = Math.exp(-x);
    let z = e * s[i];
    if (rate !== 0) z += (rate * (x < 0.5 ? -Math.expm1(-x) : 1 - e)) / l;
    if (a !== 0) {
      // expDivDiff written out: a call returning a double could box it.
      const d = (ka - l) * dt;
      const dd = d > 0.5 || d < -0.5 ? (e - ea) / (ka - l) : d >= 0 ? (d === 0 ? e * dt : (e * dt * -Math.expm1(-d)) / d) : (ea * dt * -Math.expm1(d)) / -d;
      z += ka * a * dd;
    }
    s[i] = z;
  }
  if (a !== 0) s[n] = a * ea;
}

/**
 * Disposition: from the parameter vector, write the mode rates lambda_i (1/h) and output
 * weights w_i = r_i / V_central (1/L). Returns false on parameters outside the domain.
 */
export type ModeFunction = (params: Float64Array, lam: Float64Array, w: Float64Array) => boolean;

const positive = (x: number): boolean => x > 0 && x < Infinity;

export const oneCompartmentModes: ModeFunction = (p, lam, w) => {
  const cl = p[0];
  const v = p[1];
  if (!(positive(cl) && positive(v))) return false;
  lam[0] = cl / v;
  w[0] = 1 / v;
  return true;
};

export const twoCompartmentModes: ModeFunction = (p, lam, w) => {
  const cl = p[0];
  const v1 = p[1];
  const q = p[2];
  const v2 = p[3];
  if (!(positive(cl) && positive(v1) && positive(q) && positive(v2))) return false;
  const k10 = cl / v1;
  const k12 = q / v1;
  const k21 = q / v2;
  // Discriminant as a sum of squares (no cancellation): (k10 + k12 - k21)^2 + 4 k12 k21.
  // Residues lose accuracy only as alpha -> beta, which needs Q -> 0 with CL/V1 = Q/V2.
  const u = k10 + k12 - k21;
  const root = Math.sqrt(u * u + 4 * k12 * k21);
  const alpha = 0.5 * (k10 + k12 + k21 + root);
  const beta = (k10 * k21) / alpha;
  const sep = alpha - beta;
  if (!(sep > 0)) return false;
  lam[0] = alpha;
  lam[1] = beta;
  w[0] = (alpha - k21) / sep / v1;
  w[1] = (k21 - beta) / sep / v1;
  return true;
};

/** Roots of x^3 - a2 x^2 + a1 x - a0 (three distinct positive roots), Newton-polished, into r[0..2]. */
function cubicRoots(a2: number, a1: number, a0: number, r: Float64Array): boolean {
  const m = a2 / 3;
  const p = a1 - a2 * m;
  const q = -2 * m * m * m + a1 * m - a0;
  if (!(p < 0)) return false;
  const rad = 2 * Math.sqrt(-p / 3);
  let c = (3 * q) / (p * rad);
  if (c > 1) c = 1;
  else if (c < -1) c = -1;
  const theta = Math.acos(c) / 3;
  // Trigonometric solution (Viete): theta - 2 pi k / 3 gives the largest (k = 0), middle (k = 1), smallest (k = 2).
  const r0 = m + rad * Math.cos(theta);
  const r1 = m + rad * Math.cos(theta - (2 * Math.PI) / 3);
  r[0] = r0;
  r[1] = r1;
  // The smallest root from the product of roots avoids the cancellation in m + rad cos(...).
  r[2] = a0 / (r0 * r1);
  for (let k = 0; k < 3; k++) {
    let x = r[k];
    for (let it = 0; it < 3; it++) {
      const f = ((x - a2) * x + a1) * x - a0;
      const df = (3 * x - 2 * a2) * x + a1;
      if (df === 0) break;
      const dx = f / df;
      x -= dx;
      if (Math.abs(dx) <= 1e-16 * Math.abs(x)) break;
    }
    r[k] = x;
  }
  return r[0] > r[1] && r[1] > r[2] && r[2] > 0;
}

export function makeThreeCompartmentModes(): ModeFunction {
  const roots = new Float64Array(3);
  return (p, lam, w) => {
    const cl = p[0];
    const v1 = p[1];
    const q2 = p[2];
    const v2 = p[3];
    const q3 = p[4];
    const v3 = p[5];
    if (!(positive(cl) && positive(v1) && positive(q2) && positive(v2) && positive(q3) && positive(v3))) return false;
    const k10 = cl / v1;
    const k12 = q2 / v1;
    const k21 = q2 / v2;
    const k13 = q3 / v1;
    const k31 = q3 / v3;
    const a2 = k10 + k12 + k13 + k21 + k31;
    const a1 = k10 * k21 + k10 * k31 + k21 * k31 + k21 * k13 + k31 * k12;
    const a0 = k10 * k21 * k31;
    if (!cubicRoots(a2, a1, a0, roots)) return false;
    for (let i = 0; i < 3; i++) {
      const li = roots[i];
      const lj = roots[(i + 1) % 3];
      const lk = roots[(i + 2) % 3];
      lam[i] = li;
      w[i] = ((k21 - li) * (k31 - li)) / ((lj - li) * (lk - li)) / v1;
    }
    return true;
  };
}

/** The walks (see evaluate): the general one, and the specialised ones for common histories. */
const PATH_GENERAL = 0;
/** No oral dose and no steady-state reset (bolus and infusion histories). */
const PATH_STATIC = 1;
/** Exactly one dose, oral, not at steady state (the single-dose study design). */
const PATH_ORAL_ONE = 2;
/** PATH_STATIC whose factor table fits STATIC_TABLE; one or two modes take the fastest walks. */
const PATH_STATIC_SHARED = 3;

/**
 * The factor table of the one- and two-mode static walks, per distinct length u: e_0..e_{n-1},
 * then g_0..g_{n-1}, at 2 n u. Filled in full at the start of every evaluation and read only
 * during it, so one table serves every predictor of this module instance (evaluations never
 * interleave: JavaScript runs one at a time per thread, and each worker thread has its own
 * module instance). A module constant: the optimiser embeds it, with no per-access map check.
 */
const STATIC_TABLE_CAPACITY = 1 << 15;
const STATIC_TABLE = new Float64Array(STATIC_TABLE_CAPACITY);
/** Distinct infusion rates one step program can name, and where its length index starts. */
const STEP_RATES = 2047;
const STEP_LENGTH_SHIFT = 13;
/** The running predictor's stepRates, copied in at the start of each static evaluation. */
const STATIC_RATES = new Float64Array(STEP_RATES);

/**
 * Per-evaluation scratch (mode rates and weights, modal state, the state kept across an additive
 * reset, pending lagged doses, the current-interval cells): written and read within one
 * evaluation only, so shared by every predictor of this module instance (sized for 3 modes and
 * the depot). Each predictor keeps only what outlives an evaluation (its schedule, its step
 * program, its tables and their stamps).
 */
const SCRATCH_RATES = new Float64Array(3);
const SCRATCH_WEIGHTS = new Float64Array(3);
const SCRATCH_STATE = new Float64Array(4);
const SCRATCH_KEEP = new Float64Array(4);
const SCRATCH_PENDING = new Float64Array(4);
const SCRATCH_CURRENT = new Float64Array(6);

/** The empty tables of predictors whose walk uses the module-level ones (never read or written). */
const NO_FACTORS = new Float64Array(0);
const NO_STAMPS = new Int32Array(0);

/** PATH_ORAL_ONE whose distinct lengths fit the shared ORAL_TABLE_* (one mode takes evaluateOralOne1). */
const PATH_ORAL_ONE_SHARED = 4;

/**
 * The lazily filled factor tables of the one-mode single-oral-dose walk (e, ka-weighted divided
 * difference, depot factor per distinct length) with their stamps: shared by every predictor of
 * this module instance as STATIC_TABLE is. The evaluation id is one counter for all of them, so
 * a stamp written by another predictor's evaluation never matches.
 */
const ORAL_TABLE_CAPACITY = 4096;
const ORAL_TABLE_E = new Float64Array(ORAL_TABLE_CAPACITY);
const ORAL_TABLE_B = new Float64Array(ORAL_TABLE_CAPACITY);
const ORAL_TABLE_A = new Float64Array(ORAL_TABLE_CAPACITY);
const ORAL_TABLE_STAMP = new Int32Array(ORAL_TABLE_CAPACITY);
const ORAL_TABLE_ID = new Int32Array(1);

const MODES_OTHER = 0;
const MODES_ONE = 1;
const MODES_TWO = 2;

/**
 * Everything one prepared predictor needs, in one record of fixed shape. The walk is a
 * module-level function over this record rather than a closure per predictor: V8 shares
 * optimised code between closures of one source, and code specialised to one closure's
 * captured values slows down (about 2x measured) as soon as a second predictor exists.
 */
class LinearWork {
  readonly n: number;
  readonly nDisposition: number;
  readonly modes: ModeFunction;
  readonly lam: Float64Array;
  readonly w: Float64Array;
  /** Modal state: modes 0..n-1 (mg), depot at n (mg). */
  readonly s: Float64Array;
  readonly keep: Float64Array;
  readonly sc: Schedule;
  /** Distinct-length index of the interval ending at each static point (-1: zero length). */
  readonly uniqueOf: Int32Array;
  /** Running infusion rate after each static point (mg/h). */
  readonly rateAfter: Float64Array;
  readonly lengthH: Float64Array;
  readonly stamp: Int32Array;
  readonly evalCount: Int32Array;
  /** Per distinct length u and mode i: e^{-lambda_i dt}, (1 - e^{-lambda_i dt}) / lambda_i, ka (e^{-lambda_i dt} - e^{-ka dt}) / (ka - lambda_i). */
  readonly tabE: Float64Array;
  readonly tabG: Float64Array;
  readonly tabB: Float64Array;
  /** Per distinct length: e^{-ka dt}. */
  readonly tabA: Float64Array;
  /** Oral doses of a steady-state train still in their lag time: count, next entry (h), interval (h), amount (mg). */
  readonly pend: Float64Array;
  /** Scratch cells KA, TLAG, BIO, RATE, DT, TIME. */
  readonly cur: Float64Array;
  /** Whether any infusion runs (else the infusion factors are never needed). */
  readonly hasInfusion: boolean;
  /**
   * Per distinct length: 1 when some step of that length runs with an infusion on (its factor
   * (1 - e^{-lambda dt}) / lambda is used), else 0. The static walks fill only those.
   */
  readonly infusionLength: Uint8Array;
  /**
   * The static walks' program, one code per static point k <= lastOutput: (u + 1) << 13 for a
   * step of distinct length u (0: no step), | r << 2 with r the index in stepRates of the
   * infusion rate running during the step (0: none), | 1 for a level or 2 for a bolus at the
   * point. One integer load tells the loop everything it branches on.
   */
  readonly stepOp: Int32Array;
  /** The distinct infusion rates (mg/h) the step program refers to; index 0 is "no infusion". */
  readonly stepRates: Float64Array;
  /** Index into `out` of each static output point (integer typed, for the store). */
  readonly outIndex: Int32Array;
  /**
   * No oral dose and no steady-state reset: every interval is a table step, so the walk runs
   * the static points 0..lastOutput with the tables of the first `nLengthsUsed` lengths filled
   * up front (no per-point stamp check or depot test).
   */
  readonly staticOnly: boolean;
  readonly lastOutput: number;
  readonly nLengthsUsed: number;
  /** The walk that evaluates this history (PATH_*), chosen once here. */
  readonly path: number;
  /** Which disposition formula `modes` is (MODES_*), so each call site calls one function. */
  readonly modeKind: number;

  constructor(nModes: number, nDisposition: number, modes: ModeFunction, sc: Schedule, generalOnly: boolean) {
    const n = nModes;
    if (!(Number.isInteger(n) && n >= 1 && n <= 3)) throw new Error(`linear models have 1 to 3 modes, got ${n}`);
    this.n = n;
    this.nDisposition = nDisposition;
    this.modes = modes;
    this.lam = SCRATCH_RATES;
    this.w = SCRATCH_WEIGHTS;
    this.s = SCRATCH_STATE;
    this.keep = SCRATCH_KEEP;
    this.sc = sc;
    const { timeH, kind, value, epoch: evEpoch } = sc;
    const ns = sc.n;
    // Interval lengths between consecutive static points repeat (regular dosing, equal infusion
    // durations): each distinct length gets its transition factors computed once per evaluation,
    // on first use (stamped with the evaluation count), and is reused for every repeat.
    this.uniqueOf = new Int32Array(ns);
    const lengths: number[] = [];
    const seen = new Map<number, number>();
    for (let k = 0; k < ns; k++) {
      const dt = timeH[k] - (k > 0 ? timeH[k - 1] : 0);
      if (!(dt > 0)) {
        this.uniqueOf[k] = -1;
        continue;
      }
      let u = seen.get(dt);
      if (u === undefined) {
        u = lengths.length;
        seen.set(dt, u);
        lengths.push(dt);
      }
      this.uniqueOf[k] = u;
    }
    // The running infusion rate does not depend on the parameters: starts add, stops subtract
    // unless a later steady-state reset has cut their infusion.
    this.rateAfter = new Float64Array(ns);
    this.hasInfusion = kind.includes(EV_INF_START);
    this.outIndex = new Int32Array(ns);
    for (let k = 0; k < ns; k++) this.outIndex[k] = kind[k] === EV_OUTPUT ? value[k] : -1;
    let rate = 0;
    let nInf = 0;
    let epoch = 0;
    for (let k = 0; k < ns; k++) {
      const kd = kind[k];
      if (kd === EV_INF_START) {
        rate += value[k];
        nInf++;
      } else if (kd === EV_INF_STOP && evEpoch[k] >= epoch) {
        nInf--;
        rate = nInf === 0 ? 0 : rate - value[k];
      } else if (kd === EV_RESET) {
        epoch = evEpoch[k];
        rate = 0;
        nInf = 0;
      }
      this.rateAfter[k] = rate;
    }
    const nu = lengths.length;
    this.infusionLength = new Uint8Array(nu);
    for (let k = 1; k < ns; k++) if (this.uniqueOf[k] >= 0 && this.rateAfter[k - 1] !== 0) this.infusionLength[this.uniqueOf[k]] = 1;
    this.lengthH = Float64Array.from(lengths);
    this.evalCount = new Int32Array(1);
    this.pend = SCRATCH_PENDING;
    this.cur = SCRATCH_CURRENT;
    this.staticOnly = !sc.hasOral && !kind.includes(EV_RESET);
    let lastOutput = -1;
    let nLengthsUsed = 0;
    for (let k = 0; k < ns; k++) if (kind[k] === EV_OUTPUT) lastOutput = k;
    // Lengths are numbered in order of first occurrence.
    for (let k = 0; k <= lastOutput; k++) if (this.uniqueOf[k] + 1 > nLengthsUsed) nLengthsUsed = this.uniqueOf[k] + 1;
    this.lastOutput = lastOutput;
    this.nLengthsUsed = nLengthsUsed;
    this.stepOp = new Int32Array(lastOutput + 1);
    const rateIndex = new Map<number, number>();
    const rates: number[] = [0];
    for (let k = 0; k <= lastOutput; k++) {
      const r = k > 0 ? this.rateAfter[k - 1] : 0;
      let ri = 0;
      if (r !== 0) {
        ri = rateIndex.get(r) ?? rates.length;
        if (ri === rates.length) {
          rateIndex.set(r, ri);
          rates.push(r);
        }
      }
      const ev = kind[k] === EV_OUTPUT ? 1 : kind[k] === EV_BOLUS ? 2 : 0;
      this.stepOp[k] = ((this.uniqueOf[k] + 1) << STEP_LENGTH_SHIFT) | (Math.min(ri, STEP_RATES) << 2) | ev;
    }
    this.stepRates = Float64Array.from(rates);
    let outputsOnly = true;
    for (let k = 0; k < ns; k++) if (kind[k] !== EV_OUTPUT) outputsOnly = false;
    const sharedTable = 2 * n * nu <= STATIC_TABLE_CAPACITY && rates.length < STEP_RATES && nu < 1 << (31 - STEP_LENGTH_SHIFT);
    const oralOne = sc.nOral === 1 && outputsOnly && ns > 0;
    if (generalOnly) this.path = PATH_GENERAL;
    else if (this.staticOnly) this.path = sharedTable ? PATH_STATIC_SHARED : PATH_STATIC;
    else if (oralOne) this.path = nu <= ORAL_TABLE_CAPACITY ? PATH_ORAL_ONE_SHARED : PATH_ORAL_ONE;
    else this.path = PATH_GENERAL;
    this.modeKind = modes === oneCompartmentModes ? MODES_ONE : modes === twoCompartmentModes ? MODES_TWO : MODES_OTHER;
    // The walks on module-level tables need none of their own (a fifth of a predictor's memory).
    const sharedOnly =
      (this.path === PATH_STATIC_SHARED && (this.modeKind === MODES_ONE || this.modeKind === MODES_TWO)) ||
      (this.path === PATH_ORAL_ONE_SHARED && this.modeKind === MODES_ONE);
    this.stamp = sharedOnly ? NO_STAMPS : new Int32Array(nu);
    this.tabE = sharedOnly ? NO_FACTORS : new Float64Array(nu * n);
    this.tabG = sharedOnly ? NO_FACTORS : new Float64Array(nu * n);
    this.tabB = sharedOnly ? NO_FACTORS : new Float64Array(nu * n);
    this.tabA = sharedOnly ? NO_FACTORS : new Float64Array(nu);
  }
}

/** Transition factors of distinct interval length u for the current parameters (wk.lam, cur[KA]). */
function fillTable(wk: LinearWork, u: number): void {
  const n = wk.n;
  const lam = wk.lam;
  const hasOral = wk.sc.hasOral;
  const ka = wk.cur[KA];
  const dt = wk.lengthH[u];
  const ea = hasOral ? Math.exp(-ka * dt) : 0;
  const b = u * n;
  wk.tabA[u] = ea;
  for (let i = 0; i < n; i++) {
    const l = lam[i];
    const x = l * dt;
    const e = Math.exp(-x);
    wk.tabE[b + i] = e;
    if (wk.hasInfusion) wk.tabG[b + i] = (x < 0.5 ? -Math.expm1(-x) : 1 - e) / l;
    if (hasOral) {
      const d = (ka - l) * dt;
      wk.tabB[b + i] =
        ka * (d > 0.5 || d < -0.5 ? (e - ea) / (ka - l) : d >= 0 ? (d === 0 ? e * dt : (e * dt * -Math.expm1(-d)) / d) : (ea * dt * -Math.expm1(d)) / -d);
    }
  }
}

/**
 * Advance wk.s over the static interval with distinct-length index u; factors are computed on
 * first use in evaluation `id`. Kept small so that it inlines into the walk.
 */
function tableStep(wk: LinearWork, u: number, id: number): void {
  if (wk.stamp[u] !== id) {
    wk.stamp[u] = id;
    fillTable(wk, u);
  }
  const n = wk.n;
  const s = wk.s;
  const tabE = wk.tabE;
  const b = u * n;
  const rate = wk.cur[RATE];
  const a = s[n];
  if (a === 0) {
    if (rate === 0) for (let i = 0; i < n; i++) s[i] *= tabE[b + i];
    else {
      const tabG = wk.tabG;
      for (let i = 0; i < n; i++) s[i] = tabE[b + i] * s[i] + rate * tabG[b + i];
    }
  } else {
    const tabG = wk.tabG;
    const tabB = wk.tabB;
    for (let i = 0; i < n; i++) s[i] = tabE[b + i] * s[i] + rate * tabG[b + i] + a * tabB[b + i];
    s[n] = a * wk.tabA[u];
  }
}

/**
 * Steady-state reset for dose record d at time cur[TIME] (see the module comment). With
 * `additive` (another steady-state dose at the same time) the trains superpose. False when the
 * lag spans too many intervals or two trains both have doses in their lag time.
 */
function reset(wk: LinearWork, d: number, additive: boolean): boolean {
  const { n, s, lam, cur, pend, keep } = wk;
  const { doseRoute, doseAmountMg, doseDurationH, doseIntervalH } = wk.sc;
  const t = cur[TIME];
  const ka = cur[KA];
  const tlag = cur[TLAG];
  const F = cur[BIO];
  const pendingBefore = additive ? pend[0] : 0;
  if (additive) for (let i = 0; i <= n; i++) keep[i] = s[i];
  pend[0] = 0;
  const route = doseRoute[d];
  const amount = doseAmountMg[d];
  const tau = doseIntervalH[d];
  if (route === ROUTE_BOLUS) {
    for (let i = 0; i < n; i++) s[i] = amount / Math.expm1(lam[i] * tau);
    s[n] = 0;
  } else if (route === ROUTE_INFUSION) {
    const dur = doseDurationH[d];
    for (let i = 0; i < n; i++) {
      const l = lam[i];
      s[i] = ((amount / dur) * -Math.expm1(-l * dur) * Math.exp(-l * (tau - dur))) / (l * -Math.expm1(-l * tau));
    }
    s[n] = 0;
  } else {
    const fd = F * amount;
    const ea = Math.exp(-ka * tau);
    const aAfter = fd / -Math.expm1(-ka * tau);
    for (let i = 0; i < n; i++) {
      const l = lam[i];
      const e = Math.exp(-l * tau);
      const dk = (ka - l) * tau;
      const dd = dk > 0.5 || dk < -0.5 ? (e - ea) / (ka - l) : dk >= 0 ? (dk === 0 ? e * tau : (e * tau * -Math.expm1(-dk)) / dk) : (ea * tau * -Math.expm1(dk)) / -dk;
      s[i] = (ka * dd * aAfter) / -Math.expm1(-l * tau);
    }
    s[n] = aAfter;
    // The latest train dose already in the depot is the m-th before this one, entered u0 hours ago.
    const m = Math.max(1, Math.ceil(tlag / tau));
    const u0 = m * tau - tlag;
    if (u0 > 0) {
      cur[RATE] = 0;
      cur[DT] = u0;
      advance(s, n, lam, cur);
    }
    if (m - 1 > MAX_PENDING || (m > 1 && pendingBefore > 0)) return false;
    if (m > 1) {
      pend[0] = m - 1;
      pend[1] = t + tlag - (m - 1) * tau;
      pend[2] = tau;
      pend[3] = fd;
    }
  }
  if (additive) {
    for (let i = 0; i <= n; i++) s[i] += keep[i];
    if (pend[0] === 0) pend[0] = pendingBefore;
  }
  return true;
}

function fail(out: Float64Array): boolean {
  out.fill(NaN);
  return false;
}

/**
 * The walk of a schedule without oral doses or steady-state resets (wk.staticOnly): the same
 * arithmetic as tableStep and fillTable, so the same numbers to the last bit.
 */
function evaluateStatic(wk: LinearWork, out: Float64Array): boolean {
  const { n, s, lam, w, uniqueOf, rateAfter, outIndex, tabE, tabG, lengthH, infusionLength } = wk;
  const { kind, value } = wk.sc;
  const nu = wk.nLengthsUsed;
  // Imported constants read through a checked module cell on every use; locals are registers.
  const outputKind = EV_OUTPUT;
  const bolusKind = EV_BOLUS;
  for (let u = 0; u < nu; u++) {
    const dt = lengthH[u];
    const b = u * n;
    const withInfusion = infusionLength[u] !== 0;
    for (let i = 0; i < n; i++) {
      const l = lam[i];
      const x = l * dt;
      const e = Math.exp(-x);
      tabE[b + i] = e;
      if (withInfusion) tabG[b + i] = (x < 0.5 ? -Math.expm1(-x) : 1 - e) / l;
    }
  }
  for (let i = 0; i < n; i++) s[i] = 0;
  let rate = 0;
  const last = wk.lastOutput;
  for (let k = 0; k <= last; k++) {
    const u = uniqueOf[k];
    if (u >= 0) {
      const b = u * n;
      if (rate === 0) for (let i = 0; i < n; i++) s[i] *= tabE[b + i];
      else for (let i = 0; i < n; i++) s[i] = tabE[b + i] * s[i] + rate * tabG[b + i];
    }
    const kd = kind[k];
    if (kd === outputKind) {
      let c = 0;
      for (let i = 0; i < n; i++) c += w[i] * s[i];
      out[outIndex[k]] = c < 0 ? 0 : c;
    } else if (kd === bolusKind) {
      const v = value[k];
      for (let i = 0; i < n; i++) s[i] += v;
    }
    rate = rateAfter[k];
  }
  return true;
}

/** A fresh evaluation id for the lazily filled tables (stamp[u] === id: filled in this evaluation). */
function nextEvalId(wk: LinearWork): number {
  const counter = wk.evalCount;
  if (counter[0] === 0x7fffffff) {
    // Wrap-around: forget every stamp so that no table from an old evaluation can look current.
    wk.stamp.fill(0);
    counter[0] = 0;
  }
  return ++counter[0];
}

/** wk.lam, wk.w from the parameters; one direct call per model kind keeps each call site monomorphic. */
function computeModes(wk: LinearWork, params: Float64Array): boolean {
  const kind = wk.modeKind;
  if (kind === MODES_ONE) return oneCompartmentModes(params, wk.lam, wk.w);
  if (kind === MODES_TWO) return twoCompartmentModes(params, wk.lam, wk.w);
  return wk.modes(params, wk.lam, wk.w);
}

/**
 * evaluateStatic for one mode, the state in a local and the walk driven by wk.stepOp: the same
 * operations in the same order (so the same numbers to the last bit), fewer loads and branches.
 */
function evaluateStatic1(wk: LinearWork, out: Float64Array): boolean {
  const { outIndex, lengthH, infusionLength, stepOp } = wk;
  const rates = STATIC_RATES;
  const ownRates = wk.stepRates;
  for (let r = 1; r < ownRates.length; r++) rates[r] = ownRates[r];
  const tab = STATIC_TABLE;
  const value = wk.sc.value;
  const nu = wk.nLengthsUsed;
  const l = wk.lam[0];
  const w0 = wk.w[0];
  for (let u = 0; u < nu; u++) {
    const x = l * lengthH[u];
    const e = Math.exp(-x);
    tab[2 * u] = e;
    if (infusionLength[u] !== 0) tab[2 * u + 1] = (x < 0.5 ? -Math.expm1(-x) : 1 - e) / l;
  }
  let s0 = 0;
  const last = wk.lastOutput;
  for (let k = 0; k <= last; k++) {
    const op = stepOp[k];
    const u1 = op >> 13;
    if (u1 !== 0) {
      const b = 2 * u1 - 2;
      const ri = (op >> 2) & 2047;
      if (ri === 0) s0 *= tab[b];
      else s0 = tab[b] * s0 + rates[ri] * tab[b + 1];
    }
    const ev = op & 3;
    if (ev === 1) {
      const c = 0 + w0 * s0;
      out[outIndex[k]] = c < 0 ? 0 : c;
    } else if (ev === 2) s0 += value[k];
  }
  return true;
}

/** evaluateStatic for two modes, the state in locals, driven by wk.stepOp (same operations, same order). */
function evaluateStatic2(wk: LinearWork, out: Float64Array): boolean {
  const { outIndex, lengthH, infusionLength, stepOp } = wk;
  const rates = STATIC_RATES;
  const ownRates = wk.stepRates;
  for (let r = 1; r < ownRates.length; r++) rates[r] = ownRates[r];
  const tab = STATIC_TABLE;
  const value = wk.sc.value;
  const nu = wk.nLengthsUsed;
  const l0 = wk.lam[0];
  const l1 = wk.lam[1];
  const w0 = wk.w[0];
  const w1 = wk.w[1];
  for (let u = 0; u < nu; u++) {
    const dt = lengthH[u];
    const b = 4 * u;
    const x0 = l0 * dt;
    const e0 = Math.exp(-x0);
    const x1 = l1 * dt;
    const e1 = Math.exp(-x1);
    tab[b] = e0;
    tab[b + 1] = e1;
    if (infusionLength[u] !== 0) {
      tab[b + 2] = (x0 < 0.5 ? -Math.expm1(-x0) : 1 - e0) / l0;
      tab[b + 3] = (x1 < 0.5 ? -Math.expm1(-x1) : 1 - e1) / l1;
    }
  }
  let s0 = 0;
  let s1 = 0;
  const last = wk.lastOutput;
  for (let k = 0; k <= last; k++) {
    const op = stepOp[k];
    const u1 = op >> 13;
    if (u1 !== 0) {
      const b = 4 * u1 - 4;
      const ri = (op >> 2) & 2047;
      if (ri === 0) {
        s0 *= tab[b];
        s1 *= tab[b + 1];
      } else {
        const rate = rates[ri];
        s0 = tab[b] * s0 + rate * tab[b + 2];
        s1 = tab[b + 1] * s1 + rate * tab[b + 3];
      }
    }
    const ev = op & 3;
    if (ev === 1) {
      const c = 0 + w0 * s0 + w1 * s1;
      out[outIndex[k]] = c < 0 ? 0 : c;
    } else if (ev === 2) {
      const v = value[k];
      s0 += v;
      s1 += v;
    }
  }
  return true;
}

/** Checks ka, tlag, F (the three parameters after the disposition ones). */
function absorptionValid(ka: number, tlag: number, F: number): boolean {
  return positive(ka) && tlag >= 0 && tlag < Infinity && positive(F);
}

/**
 * One oral dose, any number of modes (wk.path === PATH_ORAL_ONE; modes computed): the general
 * walk's operations for this history, without the merge of the oral stream. Levels up to the
 * entry time (dose time + tlag; a level at that time comes first) see the zero state; the first
 * level after it is reached by the advance() transition from the entry, the later ones by table
 * steps, as in the general walk.
 */
function evaluateOralOne(wk: LinearWork, params: Float64Array, out: Float64Array): boolean {
  const { n, s, w, cur, uniqueOf, outIndex, sc } = wk;
  const nd = wk.nDisposition;
  const ka = params[nd];
  const tlag = params[nd + 1];
  const F = params[nd + 2];
  if (!absorptionValid(ka, tlag, F)) return fail(out);
  cur[KA] = ka;
  cur[RATE] = 0;
  const id = nextEvalId(wk);
  const timeH = sc.timeH;
  const ns = sc.n;
  const te = sc.oralTimeH[0] + tlag;
  let k = 0;
  for (; k < ns && timeH[k] <= te; k++) {
    let c = 0;
    for (let i = 0; i < n; i++) c += w[i] * 0;
    out[outIndex[k]] = c < 0 ? 0 : c;
  }
  if (k === ns) return true;
  for (let i = 0; i < n; i++) s[i] = 0;
  s[n] = 0 + F * sc.oralAmountMg[0];
  cur[DT] = timeH[k] - te;
  advance(s, n, wk.lam, cur);
  for (let first = true; k < ns; k++, first = false) {
    const u = uniqueOf[k];
    if (!first && u >= 0) tableStep(wk, u, id);
    let c = 0;
    for (let i = 0; i < n; i++) c += w[i] * s[i];
    out[outIndex[k]] = c < 0 ? 0 : c;
  }
  return true;
}

/**
 * evaluateOralOne for the one-compartment model, state, depot and modes in locals, factors in
 * the shared ORAL_TABLE_*: the same operations in the same order as oneCompartmentModes,
 * advance, fillTable and tableStep (so the same numbers to the last bit), with no loop over
 * modes and no calls but Math.exp / expm1.
 */
function evaluateOralOne1(wk: LinearWork, params: Float64Array, out: Float64Array): boolean {
  const cl = params[0];
  const v = params[1];
  if (!(positive(cl) && positive(v))) return fail(out);
  const l = cl / v;
  const w0 = 1 / v;
  const ka = params[2];
  const tlag = params[3];
  const F = params[4];
  if (!absorptionValid(ka, tlag, F)) return fail(out);
  const { uniqueOf, outIndex, lengthH, sc } = wk;
  const tabE = ORAL_TABLE_E;
  const tabB = ORAL_TABLE_B;
  const tabA = ORAL_TABLE_A;
  const stamp = ORAL_TABLE_STAMP;
  if (ORAL_TABLE_ID[0] === 0x7fffffff) {
    // Wrap-around: forget every stamp so that no table entry from an old evaluation can look current.
    stamp.fill(0);
    ORAL_TABLE_ID[0] = 0;
  }
  const id = ++ORAL_TABLE_ID[0];
  const timeH = sc.timeH;
  const ns = sc.n;
  const te = sc.oralTimeH[0] + tlag;
  let k = 0;
  for (; k < ns && timeH[k] <= te; k++) {
    const c = 0 + w0 * 0;
    out[outIndex[k]] = c < 0 ? 0 : c;
  }
  if (k === ns) return true;
  // advance() from the entry to the first later level, from a zero state and a full depot.
  let a = 0 + F * sc.oralAmountMg[0];
  let s0: number;
  {
    const dt = timeH[k] - te;
    const ea = a !== 0 ? Math.exp(-ka * dt) : 0;
    const e = Math.exp(-(l * dt));
    let z = e * 0;
    if (a !== 0) {
      const d = (ka - l) * dt;
      const dd = d > 0.5 || d < -0.5 ? (e - ea) / (ka - l) : d >= 0 ? (d === 0 ? e * dt : (e * dt * -Math.expm1(-d)) / d) : (ea * dt * -Math.expm1(d)) / -d;
      z += ka * a * dd;
      a = a * ea;
    }
    s0 = z;
    const c = 0 + w0 * s0;
    out[outIndex[k]] = c < 0 ? 0 : c;
  }
  for (k++; k < ns; k++) {
    const u = uniqueOf[k];
    if (u >= 0) {
      if (stamp[u] !== id) {
        // fillTable for one mode (tabG stays 0: no infusion in this history).
        stamp[u] = id;
        const dt = lengthH[u];
        const ea = Math.exp(-ka * dt);
        tabA[u] = ea;
        const e = Math.exp(-(l * dt));
        tabE[u] = e;
        const d = (ka - l) * dt;
        tabB[u] = ka * (d > 0.5 || d < -0.5 ? (e - ea) / (ka - l) : d >= 0 ? (d === 0 ? e * dt : (e * dt * -Math.expm1(-d)) / d) : (ea * dt * -Math.expm1(d)) / -d);
      }
      // tableStep: rate x tabG is 0 x 0 here, kept as "+ 0" for the same rounding of a -0.
      if (a === 0) s0 *= tabE[u];
      else {
        s0 = tabE[u] * s0 + 0 + a * tabB[u];
        a = a * tabA[u];
      }
    }
    const c = 0 + w0 * s0;
    out[outIndex[k]] = c < 0 ? 0 : c;
  }
  return true;
}

/** One evaluation of the prepared predictor (see Predictor): the walk chosen for the history. */
function evaluate(wk: LinearWork, params: Float64Array, out: Float64Array): boolean {
  const path = wk.path;
  const modeKind = wk.modeKind;
  if (path === PATH_ORAL_ONE_SHARED && modeKind === MODES_ONE) return evaluateOralOne1(wk, params, out);
  if (!computeModes(wk, params)) return fail(out);
  if (path === PATH_STATIC_SHARED) {
    if (modeKind === MODES_ONE) return evaluateStatic1(wk, out);
    if (modeKind === MODES_TWO) return evaluateStatic2(wk, out);
    return evaluateStatic(wk, out);
  }
  if (path === PATH_STATIC) return evaluateStatic(wk, out);
  if (path === PATH_ORAL_ONE || path === PATH_ORAL_ONE_SHARED) return evaluateOralOne(wk, params, out);
  return evaluateGeneral(wk, params, out);
}
/** The general walk: any history (modes already computed into wk.lam, wk.w). */
function evaluateGeneral(wk: LinearWork, params: Float64Array, out: Float64Array): boolean {
  const { n, s, lam, w, cur, pend, uniqueOf, rateAfter, outIndex, sc } = wk;
  const { timeH, kind, value, epoch: evEpoch, oralTimeH, oralAmountMg, oralEpoch, hasOral } = sc;
  const ns = sc.n;
  const no = sc.nOral;
  let ka = 0;
  let tlag = 0;
  let F = 1;
  if (hasOral) {
    const nd = wk.nDisposition;
    ka = params[nd];
    tlag = params[nd + 1];
    F = params[nd + 2];
    if (!(positive(ka) && tlag >= 0 && tlag < Infinity && positive(F))) return fail(out);
  }
  cur[KA] = ka;
  cur[TLAG] = tlag;
  cur[BIO] = F;
  cur[RATE] = 0;
  for (let i = 0; i <= n; i++) s[i] = 0;
  const id = nextEvalId(wk);
  pend[0] = 0;
  let epoch = 0;
  let left = sc.nOutputs;
  let tc = 0;
  let io = 0;
  let afterStatic = true;
  let lastResetH = -1;
  for (let is = 0; is < ns && left > 0; ) {
    const ts = timeH[is];
    if (hasOral) {
      // Oral entries (and pending train doses) strictly before the next static point come first.
      const to = io < no ? oralTimeH[io] + tlag : Infinity;
      const tp = pend[0] > 0 ? pend[1] : Infinity;
      if (to < ts || tp < ts) {
        const t = to <= tp ? to : tp;
        if (t > tc) {
          cur[DT] = t - tc;
          advance(s, n, lam, cur);
        }
        tc = t;
        afterStatic = false;
        if (to <= tp) {
          if (oralEpoch[io] >= epoch) s[n] += F * oralAmountMg[io];
          io++;
        } else {
          s[n] += pend[3];
          pend[0]--;
          pend[1] += pend[2];
        }
        continue;
      }
    }
    if (afterStatic) {
      const u = uniqueOf[is];
      if (u >= 0) tableStep(wk, u, id);
    } else if (ts > tc) {
      cur[DT] = ts - tc;
      advance(s, n, lam, cur);
    }
    tc = ts;
    afterStatic = true;
    const k = kind[is];
    if (k === EV_OUTPUT) {
      let c = 0;
      for (let i = 0; i < n; i++) c += w[i] * s[i];
      // Mode sums can round to a few ulps below 0 next to a zero level; a level is never negative.
      out[outIndex[is]] = c < 0 ? 0 : c;
      left--;
    } else if (k === EV_BOLUS) {
      const v = value[is];
      for (let i = 0; i < n; i++) s[i] += v;
    } else if (k === EV_RESET) {
      epoch = evEpoch[is];
      cur[RATE] = 0;
      cur[TIME] = ts;
      if (!reset(wk, value[is], ts === lastResetH)) return fail(out);
      lastResetH = ts;
    }
    cur[RATE] = rateAfter[is];
    is++;
  }
  return true;
}

/**
 * Build the predictor of a linear model with `nModes` modes and `nDisposition` disposition
 * parameters (ka, tlag, F follow them in the vector).
 */
export function prepareLinear(
  nModes: number,
  nDisposition: number,
  modes: ModeFunction,
  doses: readonly Dose[],
  timesH: ArrayLike<number>,
  _solver?: Partial<SolverSettings>,
): Predictor {
  const wk = new LinearWork(nModes, nDisposition, modes, buildSchedule(doses, timesH), false);
  return (params: Float64Array, out: Float64Array): boolean => evaluate(wk, params, out);
}

/**
 * The same model through the general walk only, whatever the history: the reference that the
 * specialised walks are tested against bit for bit (tests/unit/models/specialisedPaths.test.ts).
 */
export function prepareLinearGeneral(
  nModes: number,
  nDisposition: number,
  modes: ModeFunction,
  doses: readonly Dose[],
  timesH: ArrayLike<number>,
): Predictor {
  const wk = new LinearWork(nModes, nDisposition, modes, buildSchedule(doses, timesH), true);
  return (params: Float64Array, out: Float64Array): boolean => (wk.modes(params, wk.lam, wk.w) ? evaluateGeneral(wk, params, out) : fail(out));
}
