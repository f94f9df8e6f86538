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
import { createDopri5, DURATION, STEP } from './dopri5.js';
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
  const ssTimes = doses.filter((d) => d.steadyStateIntervalH !== undefined).map((d) => d.timeH);
  const shared = ssTimes.find((t, i) => ssTimes.indexOf(t) !== i);
  if (shared !== undefined)
    throw new Error(`two steady-state doses at ${shared} h: the Michaelis-Menten model cannot superpose dosing trains; give one steady-state record per time (e.g. the regimen actually repeated)`);
  const sc = buildSchedule(doses, timesH);
  const { timeH, kind, value, epoch: evEpoch, oralTimeH, oralAmountMg, oralEpoch, hasOral, doseRoute, doseAmountMg, doseDurationH, doseIntervalH } = sc;
  const ns = sc.n;
  const no = sc.nOral;
  const nOut = sc.nOutputs;

  // Mutable numbers shared between closures live in typed arrays: a double held in a closure
  // variable is boxed by V8 on every write, which would allocate in the hot loop.
  const ctx = new Float64Array(5); // Vmax (mg/h), Km (mg/L), V (L), ka (1/h), infusion rate (mg/h)
  const budget = new Int32Array(1); // steps left in this evaluation
  const pend = new Float64Array(4); // train doses in their lag time: count, next entry (h), interval (h), amount (mg)
  const rhs = (y: Float64Array, dy: Float64Array): void => {
    const c = y[0] / ctx[2];
    const elim = c > 0 ? (ctx[0] * c) / (ctx[1] + c) : (ctx[0] * c) / ctx[1];
    dy[0] = ctx[3] * y[1] + ctx[4] - elim;
    dy[1] = -ctx[3] * y[1];
  };
  const ode = createDopri5(2, rhs, relTol, absTol);
  const work = ode.work;
  const y = new Float64Array(2);
  const maxBudget = Math.min(Math.floor(maxSteps), 0x3fffffff);

  /** Integrate y over work[DURATION] h within the step budget; false when it ran out or the solver failed. */
  const run = (): boolean => {
    if (!(work[DURATION] > 0)) return true;
    const used = ode.integrate(y, budget[0]);
    if (used < 0) return false;
    budget[0] -= used;
    return true;
  };

  // Steady-state iteration cells: depot before an entry (mg), amount entering (mg), trough in (mg);
  // and the walk's oral lag (h), bioavailability and reset time (h).
  const ssCell = new Float64Array(3);
  const cur = new Float64Array(3);

  /** One interval of the steady-state train of dose d from trough ssCell[2]; the next trough is left in y[0]. */
  const oneInterval = (d: number, route: number): boolean => {
    const tau = doseIntervalH[d];
    y[0] = ssCell[2];
    y[1] = ssCell[0];
    work[STEP] = 0;
    if (route === ROUTE_BOLUS) {
      y[0] += ssCell[1];
      work[DURATION] = tau;
      return run();
    }
    if (route === ROUTE_INFUSION) {
      const dur = doseDurationH[d];
      ctx[4] = ssCell[1] / dur;
      work[DURATION] = dur;
      const ok = run();
      ctx[4] = 0;
      work[STEP] = 0;
      work[DURATION] = tau - dur;
      return ok && run();
    }
    y[1] += ssCell[1];
    work[DURATION] = tau;
    return run();
  };

  /** Steady-state reset for dose record d at time cur[2]; leaves the state in y. */
  const reset = (d: number): boolean => {
    const ka = ctx[3];
    const tlag = cur[0];
    pend[0] = 0;
    const route = doseRoute[d];
    const tau = doseIntervalH[d];
    const oral = route !== ROUTE_BOLUS && route !== ROUTE_INFUSION;
    const amount = oral ? cur[1] * doseAmountMg[d] : doseAmountMg[d];
    if (!(amount / tau < ctx[0])) return false;
    ctx[4] = 0;
    const aBefore = oral ? (amount * Math.exp(-ka * tau)) / -Math.expm1(-ka * tau) : 0;
    ssCell[0] = aBefore;
    ssCell[1] = amount;
    // Secant iteration on g(x) - x, x the trough; plain iteration when a secant step is unusable.
    let x0 = 0;
    ssCell[2] = x0;
    if (!oneInterval(d, route)) return false;
    let g0 = y[0];
    let x1 = g0;
    let converged = false;
    for (let it = 0; it < MAX_SS_ITERATIONS; it++) {
      ssCell[2] = x1;
      if (!oneInterval(d, route)) return false;
      const g1 = y[0];
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
        if (!run()) return false;
        work[STEP] = 0;
      }
      if (m - 1 > MAX_PENDING) return false;
      pend[0] = m - 1;
      pend[1] = cur[2] + tlag - (m - 1) * tau;
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
    cur[0] = tlag;
    cur[1] = F;
    y[0] = 0;
    y[1] = 0;
    work[STEP] = 0;
    budget[0] = maxBudget;
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
          work[DURATION] = t - tc;
          if (!run()) return fail(out);
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
      if (!run()) return fail(out);
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
        work[STEP] = 0;
      } else if (k === EV_INF_STOP) {
        if (evEpoch[is] >= epoch) {
          nInf--;
          rate = nInf === 0 ? 0 : rate - v;
          ctx[4] = rate;
          work[STEP] = 0;
        }
      } else if (k === EV_RESET) {
        epoch = evEpoch[is];
        rate = 0;
        nInf = 0;
        ctx[4] = 0;
        cur[2] = ts;
        if (!reset(v)) return fail(out);
      }
      is++;
    }
    return true;
  };
}
