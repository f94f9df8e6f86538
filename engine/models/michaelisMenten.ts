/**
 * One-compartment model with Michaelis-Menten elimination, dA/dt = ka a + R(t) - Vmax C/(Km + C),
 * C = A/V, depot da/dt = -ka a, solved by the adaptive Dormand-Prince 5(4) integrator
 * (dopri5.ts). Inputs are piecewise constant between events and the integration stops at every
 * event, output and lagged oral entry (never steps over a discontinuity); the step-size guess
 * carries over between outputs and is re-chosen after a change of infusion rate. Tolerances
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
import { createDopri5 } from './dopri5.js';
import {
  buildSchedule,
  EV_BOLUS,
  EV_INF_START,
  EV_INF_STOP,
  EV_OUTPUT,
  EV_RESET,
  ROUTE_BOLUS,
  ROUTE_INFUSION,
} from './schedule.js';
import { DEFAULT_SOLVER_SETTINGS, type Predictor, type SolverSettings } from './types.js';

export const MAX_SS_ITERATIONS = 200;
const MAX_PENDING = 10_000;

const positive = (x: number): boolean => x > 0 && x < Infinity;

export function prepareMichaelisMenten(doses: readonly Dose[], timesH: ArrayLike<number>, solver?: Partial<SolverSettings>): Predictor {
  const settings: SolverSettings = { ...DEFAULT_SOLVER_SETTINGS, ...(solver ?? {}) };
  const { relTol, absTol, maxSteps } = settings;
  if (!(relTol > 0 && absTol > 0 && maxSteps >= 1))
    throw new Error(`solver settings: relTol and absTol must be > 0 and maxSteps >= 1 (got ${relTol}, ${absTol}, ${maxSteps})`);
  const sc = buildSchedule(doses, timesH);
  const { timeH, kind, value, epoch: evEpoch, oralTimeH, oralAmountMg, oralEpoch, hasOral, doseRoute, doseAmountMg, doseDurationH, doseIntervalH } = sc;
  const ns = sc.n;
  const no = sc.nOral;
  const nOut = sc.nOutputs;

  // Mutable numbers shared between closures live in typed arrays: a double held in a closure
  // variable is boxed by V8 on every write, which would allocate in the hot loop.
  const ctx = new Float64Array(5); // Vmax (mg/h), Km (mg/L), V (L), ka (1/h), infusion rate (mg/h)
  const budget = new Float64Array(1); // steps left in this evaluation
  const pend = new Float64Array(4); // train doses in their lag time: count, next entry (h), interval (h), amount (mg)
  const rhs = (y: Float64Array, dy: Float64Array): void => {
    const c = y[0] / ctx[2];
    const elim = c > 0 ? (ctx[0] * c) / (ctx[1] + c) : (ctx[0] * c) / ctx[1];
    dy[0] = ctx[3] * y[1] + ctx[4] - elim;
    dy[1] = -ctx[3] * y[1];
  };
  const ode = createDopri5(2, rhs);
  const y = new Float64Array(2);

  /** Integrate y over dt within the step budget; false when the budget ran out or the solver failed. */
  const step = (dt: number): boolean => {
    if (!(dt > 0)) return true;
    const used = ode.integrate(y, dt, relTol, absTol, budget[0]);
    if (used < 0) return false;
    budget[0] -= used;
    return true;
  };

  /** One interval of the steady-state train from trough x (depot a0 before the entry); returns the next trough or NaN. */
  const oneInterval = (x: number, a0: number, route: number, amount: number, dur: number, tau: number): number => {
    y[0] = x;
    y[1] = a0;
    ode.h = 0;
    if (route === ROUTE_BOLUS) {
      y[0] += amount;
      if (!step(tau)) return NaN;
    } else if (route === ROUTE_INFUSION) {
      ctx[4] = amount / dur;
      const ok = step(dur);
      ctx[4] = 0;
      ode.h = 0;
      if (!ok || !step(tau - dur)) return NaN;
    } else {
      y[1] += amount;
      if (!step(tau)) return NaN;
    }
    return y[0];
  };

  /** Steady-state reset for dose record d at time t; leaves the state in y. */
  const reset = (d: number, t: number, ka: number, tlag: number, F: number): boolean => {
    pend[0] = 0;
    const route = doseRoute[d];
    const tau = doseIntervalH[d];
    const dur = doseDurationH[d];
    const oral = route !== ROUTE_BOLUS && route !== ROUTE_INFUSION;
    const amount = oral ? F * doseAmountMg[d] : doseAmountMg[d];
    if (!(amount / tau < ctx[0])) return false;
    const saved = ctx[4];
    ctx[4] = 0;
    const aBefore = oral ? (amount * Math.exp(-ka * tau)) / -Math.expm1(-ka * tau) : 0;
    let x0 = 0;
    let g0 = oneInterval(x0, aBefore, route, amount, dur, tau);
    let x1 = g0;
    let converged = false;
    for (let it = 0; it < MAX_SS_ITERATIONS; it++) {
      const g1 = oneInterval(x1, aBefore, route, amount, dur, tau);
      if (!(g1 === g1)) return false;
      const h0 = g0 - x0;
      const h1 = g1 - x1;
      let next = h1 !== h0 ? x1 - (h1 * (x1 - x0)) / (h1 - h0) : g1;
      if (!(next >= 0 && next < Infinity)) next = g1;
      const change = Math.abs(next - x1);
      x0 = x1;
      g0 = g1;
      x1 = next;
      if (change <= relTol * Math.abs(x1) + absTol) {
        converged = true;
        break;
      }
    }
    ctx[4] = saved;
    if (!converged) return false;
    y[0] = x1;
    y[1] = aBefore;
    ode.h = 0;
    if (oral) {
      // The oral train is shifted by tlag: the last entry before t was u0 hours earlier.
      const m = Math.max(1, Math.ceil(tlag / tau));
      const u0 = m * tau - tlag;
      if (u0 < tau) {
        y[1] += amount;
        if (!step(u0)) return false;
        ode.h = 0;
      }
      if (m - 1 > MAX_PENDING) return false;
      pend[0] = m - 1;
      pend[1] = t + tlag - (m - 1) * tau;
      pend[2] = tau;
      pend[3] = amount;
    }
    return true;
  };

  const fail = (out: Float64Array): boolean => {
    out.fill(NaN);
    return false;
  };

  return (params: Float64Array, out: Float64Array): boolean => {
    const vmax = params[0];
    const km = params[1];
    const vol = params[2];
    if (!(positive(vmax) && positive(km) && positive(vol))) return fail(out);
    let ka = 0;
    let tlag = 0;
    let F = 1;
    if (hasOral) {
      ka = params[3];
      tlag = params[4];
      F = params[5];
      if (!(positive(ka) && tlag >= 0 && tlag < Infinity && positive(F))) return fail(out);
    }
    ctx[0] = vmax;
    ctx[1] = km;
    ctx[2] = vol;
    ctx[3] = ka;
    ctx[4] = 0;
    y[0] = 0;
    y[1] = 0;
    ode.h = 0;
    budget[0] = maxSteps;
    pend[0] = 0;
    let rate = 0;
    let nInf = 0;
    let epoch = 0;
    let tc = 0;
    let io = 0;
    let left = nOut;
    for (let is = 0; is < ns && left > 0; ) {
      const ts = timeH[is];
      if (hasOral) {
        const to = io < no ? oralTimeH[io] + tlag : Infinity;
        const tp = pend[0] > 0 ? pend[1] : Infinity;
        if (to < ts || tp < ts) {
          const t = to <= tp ? to : tp;
          if (!step(t - tc)) return fail(out);
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
      if (!step(ts - tc)) return fail(out);
      tc = ts;
      const k = kind[is];
      const v = value[is];
      if (k === EV_OUTPUT) {
        out[v] = y[0] / vol;
        left--;
      } else if (k === EV_BOLUS) {
        y[0] += v;
      } else if (k === EV_INF_START) {
        rate += v;
        nInf++;
        ctx[4] = rate;
        ode.h = 0;
      } else if (k === EV_INF_STOP) {
        if (evEpoch[is] >= epoch) {
          nInf--;
          rate = nInf === 0 ? 0 : rate - v;
          ctx[4] = rate;
          ode.h = 0;
        }
      } else if (k === EV_RESET) {
        epoch = evEpoch[is];
        rate = 0;
        nInf = 0;
        ctx[4] = 0;
        if (!reset(v, ts, ka, tlag, F)) return fail(out);
      }
      is++;
    }
    return true;
  };
}
