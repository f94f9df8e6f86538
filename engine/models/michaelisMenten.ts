/**
 * One-compartment model with Michaelis-Menten elimination, dA/dt = ka a + R(t) - Vmax C/(Km + C),
 * C = A/V, depot da/dt = -ka a, solved by the adaptive Dormand-Prince 5(4) integrator
 * (dopri5.ts). Inputs are piecewise constant between events and the integration stops at every
 * event, output and lagged oral entry (never steps over a discontinuity); the step-size guess
 * carries over. Tolerances (SolverSettings) apply to the amounts in mg (central and depot).
 *
 * Steady state: no closed form. The one-interval map is iterated from an empty body until the
 * trough settles: the remaining error is estimated from the geometric rate of the last two
 * changes, delta * rho / (1 - rho), and the iteration stops when it is below relTol |trough| +
 * absTol (at most MAX_SS_INTERVALS intervals). When the average input rate F D / tau reaches
 * Vmax no steady state exists and the predictor returns false.
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

export const MAX_SS_INTERVALS = 5000;
const MAX_PENDING = 10_000;

const positive = (x: number): boolean => x > 0 && x < Infinity;

export function prepareMichaelisMenten(doses: readonly Dose[], timesH: ArrayLike<number>, solver?: Partial<SolverSettings>): Predictor {
  const settings: SolverSettings = { ...DEFAULT_SOLVER_SETTINGS, ...(solver ?? {}) };
  const { relTol, absTol, maxSteps } = settings;
  if (!(relTol > 0 && absTol > 0 && maxSteps >= 1)) throw new Error(`solver settings: relTol and absTol must be > 0 and maxSteps >= 1 (got ${relTol}, ${absTol}, ${maxSteps})`);
  const sc = buildSchedule(doses, timesH);
  const { timeH, kind, value, epoch: evEpoch, oralTimeH, oralAmountMg, oralEpoch, hasOral, doseRoute, doseAmountMg, doseDurationH, doseIntervalH } = sc;
  const ns = sc.n;
  const no = sc.nOral;
  const nOut = sc.nOutputs;

  // Mutable numbers shared with the right-hand side live in a typed array: a double held in a
  // closure variable is boxed by V8 on every write, which would allocate in the hot loop.
  const ctx = new Float64Array(5); // Vmax (mg/h), Km (mg/L), V (L), ka (1/h), infusion rate (mg/h)
  const rhs = (y: Float64Array, dy: Float64Array): void => {
    const c = y[0] / ctx[2];
    const elim = c > 0 ? (ctx[0] * c) / (ctx[1] + c) : (ctx[0] * c) / ctx[1];
    dy[0] = ctx[3] * y[1] + ctx[4] - elim;
    dy[1] = -ctx[3] * y[1];
  };
  const ode = createDopri5(2, rhs);
  const y = new Float64Array(2);

  /** Integrate over dt within the remaining step budget; returns the budget left, or -1. */
  const step = (dt: number, budget: number): number => {
    if (!(dt > 0)) return budget;
    const used = ode.integrate(y, dt, relTol, absTol, budget);
    return used < 0 ? -1 : budget - used;
  };

  const fail = (out: Float64Array): boolean => {
    out.fill(NaN);
    return false;
  };

  return (params: Float64Array, out: Float64Array): boolean => {
    const vmax = params[0];
    const vol = params[2];
    if (!(positive(vmax) && positive(params[1]) && positive(vol))) return fail(out);
    ctx[0] = vmax;
    ctx[1] = params[1];
    ctx[2] = vol;
    let ka = 0;
    let tlag = 0;
    let F = 1;
    if (hasOral) {
      ka = params[3];
      tlag = params[4];
      F = params[5];
      if (!(positive(ka) && tlag >= 0 && tlag < Infinity && positive(F))) return fail(out);
    }
    ctx[3] = ka;
    ctx[4] = 0;
    y[0] = 0;
    y[1] = 0;
    ode.h = 0;
    let budget = maxSteps;
    let rate = 0;
    let nInf = 0;
    let epoch = 0;
    let tc = 0;
    let is = 0;
    let io = 0;
    let pendCount = 0;
    let pendTimeH = 0;
    let pendTauH = 0;
    let pendAmountMg = 0;
    let left = nOut;
    while (left > 0) {
      const ts = is < ns ? timeH[is] : Infinity;
      const to = io < no ? oralTimeH[io] + tlag : Infinity;
      const tp = pendCount > 0 ? pendTimeH : Infinity;
      let t: number;
      let src: number;
      if (ts <= to && ts <= tp) {
        t = ts;
        src = 0;
      } else if (tp <= to) {
        t = tp;
        src = 2;
      } else {
        t = to;
        src = 1;
      }
      if (t === Infinity) break;
      if ((budget = step(t - tc, budget)) < 0) return fail(out);
      tc = t;
      if (src === 1) {
        if (oralEpoch[io] >= epoch) y[1] += F * oralAmountMg[io];
        io++;
        continue;
      }
      if (src === 2) {
        y[1] += pendAmountMg;
        pendCount--;
        pendTimeH += pendTauH;
        continue;
      }
      const k = kind[is];
      const v = value[is];
      const ep = evEpoch[is];
      is++;
      if (k === EV_OUTPUT) {
        out[v] = y[0] / vol;
        left--;
      } else if (k === EV_BOLUS) {
        y[0] += v;
      } else if (k === EV_INF_START) {
        rate += v;
        ctx[4] = rate;
        nInf++;
        ode.h = 0;
      } else if (k === EV_INF_STOP) {
        if (ep >= epoch) {
          nInf--;
          rate = nInf === 0 ? 0 : rate - v;
          ctx[4] = rate;
          ode.h = 0;
        }
      } else if (k === EV_RESET) {
        epoch = ep;
        nInf = 0;
        pendCount = 0;
        const d = v;
        const route = doseRoute[d];
        const amount = doseAmountMg[d];
        const tau = doseIntervalH[d];
        const fd = route === ROUTE_BOLUS || route === ROUTE_INFUSION ? amount : F * amount;
        if (!(fd / tau < vmax)) return fail(out);
        const dur = doseDurationH[d];
        y[0] = 0;
        y[1] = 0;
        rate = 0;
        ctx[4] = 0;
        let prevDelta = NaN;
        let converged = false;
        for (let it = 0; it < MAX_SS_INTERVALS && !converged; it++) {
          const x0 = y[0];
          const a0 = y[1];
          ode.h = 0;
          if (route === ROUTE_BOLUS) {
            y[0] += amount;
            if ((budget = step(tau, budget)) < 0) return fail(out);
          } else if (route === ROUTE_INFUSION) {
            ctx[4] = amount / dur;
            if ((budget = step(dur, budget)) < 0) return fail(out);
            ctx[4] = 0;
            ode.h = 0;
            if ((budget = step(tau - dur, budget)) < 0) return fail(out);
          } else {
            y[1] += fd;
            if ((budget = step(tau, budget)) < 0) return fail(out);
          }
          const delta = Math.abs(y[0] - x0) + Math.abs(y[1] - a0);
          const tol = relTol * (Math.abs(y[0]) + Math.abs(y[1])) + absTol;
          if (delta === 0) converged = true;
          else if (prevDelta === prevDelta) {
            const rho = delta / prevDelta;
            if (rho < 1 && (delta * rho) / (1 - rho) <= tol) converged = true;
          }
          prevDelta = delta;
        }
        if (!converged) return fail(out);
        if (route !== ROUTE_BOLUS && route !== ROUTE_INFUSION) {
          // The oral train is shifted by tlag: from the last entry before t, u0 hours have passed.
          const m = Math.max(1, Math.ceil(tlag / tau));
          const u0 = m * tau - tlag;
          if (u0 < tau) {
            y[1] += fd;
            ode.h = 0;
            if ((budget = step(u0, budget)) < 0) return fail(out);
          }
          if (m - 1 > MAX_PENDING) return fail(out);
          pendCount = m - 1;
          pendTimeH = t + tlag - (m - 1) * tau;
          pendTauH = tau;
          pendAmountMg = fd;
        }
        ode.h = 0;
      }
    }
    return true;
  };
}
