/**
 * One-compartment model with Michaelis-Menten elimination, dA/dt = ka a + R(t) - Vmax C/(Km + C),
 * C = A/V, depot da/dt = -ka a, solved by the adaptive Dormand-Prince 5(4) integrator
 * (dopri5.ts). Inputs are piecewise constant between events and the integration stops at every
 * event, output and lagged oral entry (never steps over a discontinuity); the step-size guess
 * carries over across events (each piece is smooth, so the error control judges a carried step
 * like any other; this halves the steps of long histories). Tolerances
 * (SolverSettings) apply to the amounts in mg (central and depot).
 *
 * Steady state: no closed form for the central amount. The depot is linear, so its periodic
 * state is exact (F D e^{-ka tau} / (1 - e^{-ka tau}) before an entry). The central trough x is
 * the fixed point of the one-interval map g (one dose then tau hours, integrated); it is found by
 * the secant method on g(x) - x from x = 0, falling back to plain iteration x <- g(x) when a
 * secant step is unusable, and stops when the step is below relTol |x| + absTol (at most
 * MAX_SS_ITERATIONS maps). When the average input rate F D / tau reaches Vmax no steady state
 * exists and the predictor returns false.
 */
import type { Dose } from '../data/types.js';
import { Dopri5, DURATION, STEP } from './dopri5.js';
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
import { DEFAULT_SOLVER_SETTINGS, type Predictor, type SolverSettings } from './types.js';

export const MAX_SS_ITERATIONS = 200;
const MAX_PENDING = 10_000;

const positive = (x: number): boolean => x > 0 && x < Infinity;

// Cells of MichaelisMentenWork.ctx (doubles shared between methods live in a typed array, never boxed).
const VMAX = 0;
const KM = 1;
const VOL = 2;
const KA = 3;
const RATE = 4;
const TLAG = 5;
const BIO = 6;
const TIME = 7;
// Cells of MichaelisMentenWork.ss: depot before an entry (mg), amount entering (mg), trough in (mg).
const SS_DEPOT = 0;
const SS_AMOUNT = 1;
const SS_TROUGH = 2;

/**
 * One prepared predictor: the schedule, the integrator (this object, with the model's
 * right-hand side) and its scratch state. Methods rather than closures, so that every subject's
 * predictor runs the same optimised code.
 */
class MichaelisMentenWork extends Dopri5 {
  /** Vmax (mg/h), Km (mg/L), V (L), ka (1/h), infusion rate (mg/h), tlag (h), F, reset time (h). */
  readonly ctx = new Float64Array(8);
  readonly ss = new Float64Array(3);
  /** Train doses in their lag time: count, next entry (h), interval (h), amount (mg). */
  readonly pend = new Float64Array(4);
  /** Steps left in this evaluation. */
  readonly budget = new Int32Array(1);
  /** State: central amount (mg), depot amount (mg; integrated only when there are oral doses). */
  readonly y = new Float64Array(2);

  constructor(
    readonly sc: Schedule,
    relTol: number,
    absTol: number,
    readonly maxBudget: number,
  ) {
    // Without oral doses the depot stays empty: integrate the central amount alone.
    super(sc.hasOral ? 2 : 1, relTol, absTol);
  }

  rhs(y: Float64Array, dy: Float64Array): void {
    const ctx = this.ctx;
    const c = y[0] / ctx[VOL];
    const elim = c > 0 ? (ctx[VMAX] * c) / (ctx[KM] + c) : (ctx[VMAX] * c) / ctx[KM];
    if (this.n === 2) {
      dy[0] = ctx[KA] * y[1] + ctx[RATE] - elim;
      dy[1] = -ctx[KA] * y[1];
    } else dy[0] = ctx[RATE] - elim;
  }

  /** Integrate y over work[DURATION] h within the step budget; false when it ran out or the solver failed. */
  run(): boolean {
    if (!(this.work[DURATION] > 0)) return true;
    const used = this.integrate(this.y, this.budget[0]);
    if (used < 0) return false;
    this.budget[0] -= used;
    return true;
  }

  /** One interval of the steady-state train of dose d from trough ss[SS_TROUGH]; the next trough is left in y[0]. */
  oneInterval(d: number, route: number): boolean {
    const { y, work, ss, ctx } = this;
    const tau = this.sc.doseIntervalH[d];
    y[0] = ss[SS_TROUGH];
    y[1] = ss[SS_DEPOT];
    work[STEP] = 0;
    if (route === ROUTE_BOLUS) {
      y[0] += ss[SS_AMOUNT];
      work[DURATION] = tau;
      return this.run();
    }
    if (route === ROUTE_INFUSION) {
      const dur = this.sc.doseDurationH[d];
      ctx[RATE] = ss[SS_AMOUNT] / dur;
      work[DURATION] = dur;
      const ok = this.run();
      ctx[RATE] = 0;
      work[DURATION] = tau - dur;
      return ok && this.run();
    }
    y[1] += ss[SS_AMOUNT];
    work[DURATION] = tau;
    return this.run();
  }

  /** Steady-state reset for dose record d at time ctx[TIME]; leaves the state in y. */
  reset(d: number): boolean {
    const { y, work, ss, ctx, pend, sc } = this;
    const ka = ctx[KA];
    const tlag = ctx[TLAG];
    pend[0] = 0;
    const route = sc.doseRoute[d];
    const tau = sc.doseIntervalH[d];
    const oral = route !== ROUTE_BOLUS && route !== ROUTE_INFUSION;
    const amount = oral ? ctx[BIO] * sc.doseAmountMg[d] : sc.doseAmountMg[d];
    if (!(amount / tau < ctx[VMAX])) return false;
    ctx[RATE] = 0;
    const aBefore = oral ? (amount * Math.exp(-ka * tau)) / -Math.expm1(-ka * tau) : 0;
    ss[SS_DEPOT] = aBefore;
    ss[SS_AMOUNT] = amount;
    // Secant iteration on g(x) - x, x the trough; plain iteration when a secant step is unusable.
    let x0 = 0;
    ss[SS_TROUGH] = x0;
    if (!this.oneInterval(d, route)) return false;
    let g0 = y[0];
    let x1 = g0;
    let converged = false;
    for (let it = 0; it < MAX_SS_ITERATIONS; it++) {
      ss[SS_TROUGH] = x1;
      if (!this.oneInterval(d, route)) return false;
      const g1 = y[0];
      const h0 = g0 - x0;
      const h1 = g1 - x1;
      let next = h1 !== h0 ? x1 - (h1 * (x1 - x0)) / (h1 - h0) : g1;
      if (!(next >= 0 && next < Infinity)) next = g1;
      const change = Math.abs(next - x1);
      x0 = x1;
      g0 = g1;
      x1 = next;
      if (change <= this.relTol * Math.abs(x1) + this.absTol) {
        converged = true;
        break;
      }
    }
    if (!converged) return false;
    y[0] = x1;
    y[1] = aBefore;
    work[STEP] = 0;
    if (oral) {
      // The oral train is shifted by tlag: the last entry before t was u0 hours earlier.
      const m = Math.max(1, Math.ceil(tlag / tau));
      const u0 = m * tau - tlag;
      if (u0 < tau) {
        y[1] += amount;
        work[DURATION] = u0;
        if (!this.run()) return false;
        work[STEP] = 0;
      }
      if (m - 1 > MAX_PENDING) return false;
      pend[0] = m - 1;
      pend[1] = ctx[TIME] + tlag - (m - 1) * tau;
      pend[2] = tau;
      pend[3] = amount;
    }
    return true;
  }

  evaluate(params: Float64Array, out: Float64Array): boolean {
    const { y, work, ctx, pend, sc } = this;
    const vmax = params[0];
    const km = params[1];
    const vol = params[2];
    if (!(positive(vmax) && positive(km) && positive(vol))) return fail(out);
    const { timeH, kind, value, epoch: evEpoch, oralTimeH, oralAmountMg, oralEpoch, hasOral } = sc;
    const ns = sc.n;
    const no = sc.nOral;
    let ka = 0;
    let tlag = 0;
    let F = 1;
    if (hasOral) {
      ka = params[3];
      tlag = params[4];
      F = params[5];
      if (!(positive(ka) && tlag >= 0 && tlag < Infinity && positive(F))) return fail(out);
    }
    ctx[VMAX] = vmax;
    ctx[KM] = km;
    ctx[VOL] = vol;
    ctx[KA] = ka;
    ctx[RATE] = 0;
    ctx[TLAG] = tlag;
    ctx[BIO] = F;
    y[0] = 0;
    y[1] = 0;
    work[STEP] = 0;
    this.budget[0] = this.maxBudget;
    pend[0] = 0;
    let rate = 0;
    let nInf = 0;
    let epoch = 0;
    let tc = 0;
    let io = 0;
    let left = sc.nOutputs;
    for (let is = 0; is < ns && left > 0; ) {
      const ts = timeH[is];
      if (hasOral) {
        const to = io < no ? oralTimeH[io] + tlag : Infinity;
        const tp = pend[0] > 0 ? pend[1] : Infinity;
        if (to < ts || tp < ts) {
          const t = to <= tp ? to : tp;
          work[DURATION] = t - tc;
          if (!this.run()) return fail(out);
          tc = t;
          if (to <= tp) {
            if (oralEpoch[io] >= epoch) y[1] += F * oralAmountMg[io];
            io++;
          } else {
            y[1] += pend[3];
            pend[0]--;
            pend[1] += pend[2];
          }
          continue;
        }
      }
      work[DURATION] = ts - tc;
      if (!this.run()) return fail(out);
      tc = ts;
      const k = kind[is];
      const v = value[is];
      if (k === EV_OUTPUT) {
        const c = y[0] / vol;
        out[v] = c < 0 ? 0 : c;
        left--;
      } else if (k === EV_BOLUS) {
        y[0] += v;
      } else if (k === EV_INF_START) {
        rate += v;
        nInf++;
        ctx[RATE] = rate;
      } else if (k === EV_INF_STOP) {
        if (evEpoch[is] >= epoch) {
          nInf--;
          rate = nInf === 0 ? 0 : rate - v;
          ctx[RATE] = rate;
        }
      } else if (k === EV_RESET) {
        epoch = evEpoch[is];
        rate = 0;
        nInf = 0;
        ctx[TIME] = ts;
        if (!this.reset(v)) return fail(out);
        ctx[RATE] = 0;
      }
      is++;
    }
    return true;
  }
}

function fail(out: Float64Array): boolean {
  out.fill(NaN);
  return false;
}

export function prepareMichaelisMenten(doses: readonly Dose[], timesH: ArrayLike<number>, solver?: Partial<SolverSettings>): Predictor {
  const settings: SolverSettings = { ...DEFAULT_SOLVER_SETTINGS, ...(solver ?? {}) };
  const { relTol, absTol, maxSteps } = settings;
  if (!(relTol > 0 && absTol > 0 && maxSteps >= 1))
    throw new Error(`solver settings: relTol and absTol must be > 0 and maxSteps >= 1 (got ${relTol}, ${absTol}, ${maxSteps})`);
  const ssTimes = doses.filter((d) => d.steadyStateIntervalH !== undefined).map((d) => d.timeH);
  const shared = ssTimes.find((t, i) => ssTimes.indexOf(t) !== i);
  if (shared !== undefined)
    throw new Error(
      `two steady-state doses at ${shared} h: the Michaelis-Menten model cannot superpose dosing trains; give one steady-state record per time (e.g. the regimen actually repeated)`,
    );
  const wk = new MichaelisMentenWork(buildSchedule(doses, timesH), relTol, absTol, Math.min(Math.floor(maxSteps), 0x3fffffff));
  return (params: Float64Array, out: Float64Array): boolean => wk.evaluate(params, out);
}
