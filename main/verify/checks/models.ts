/**
 * Structural models against concentrations computed outside Plateau (closed forms, an ODE
 * solver, the exact matrix exponential), and steady-state metrics against the textbook
 * intermittent-infusion equations.
 */
import type { Dose } from '../../../engine/data/types.js';
import { buildSteadyStateEvaluator } from '../../../engine/dosing/metrics.js';
import { getStructuralModel } from '../../../engine/models/catalogue.js';
import type { StructureId } from '../../../engine/models/types.js';
import { fmt, relativeRow, summarise, tol, type CheckKind } from './common.js';
import type { CheckRow } from '../types.js';

interface RefDose { time_h: number; amount_mg: number; route: Dose['route']; duration_h: number; ss_interval_h?: number }
interface RefCase { name: string; model: StructureId; params: (number | null)[]; doses: RefDose[]; times: number[]; concMgL: number[] }

const toDose = (d: RefDose): Dose => ({
  timeH: d.time_h,
  amountMg: d.amount_mg,
  route: d.route,
  durationH: d.duration_h,
  ...(d.ss_interval_h ? { steadyStateIntervalH: d.ss_interval_h } : {}),
});

const toParams = (p: (number | null)[]): Float64Array => Float64Array.from(p.map((x) => (x === null ? NaN : x)));

/** Every case of the reference file: the largest error over its times, per case. */
export const modelCurves: CheckKind = {
  describe(t) {
    const parts: string[] = [];
    for (const [group, label] of [['analytic', 'analytic models'], ['numerical', 'numerically solved models']] as const) {
      if (t[group] !== undefined) parts.push(`${label}: |error| <= ${fmt(tol(t, group, 'relative'))} x |reference| + ${fmt(tol(t, group, 'absoluteMgL'))} mg/L at every time`);
    }
    return parts.join('; ');
  },
  async run(spec, ctx) {
    const ref = await ctx.files.readJson<{ cases: RefCase[] }>(spec.reference);
    if (!Array.isArray(ref.cases) || ref.cases.length === 0) throw new Error(`${spec.reference} holds no cases`);
    const rows: CheckRow[] = [];
    for (const c of ref.cases) {
      const model = getStructuralModel(c.model);
      const group = model.analytic ? 'analytic' : 'numerical';
      const relTol = tol(spec.tolerance, group, 'relative');
      const absFloor = tol(spec.tolerance, group, 'absoluteMgL');
      const predict = model.prepare(c.doses.map(toDose), c.times);
      const out = new Float64Array(c.times.length);
      const ok = predict(toParams(c.params), out);
      // Ratio of the error to its allowance: <= 1 passes. Reported with the worst relative error.
      let worstRatio = 0;
      let worstRel = 0;
      let worstAt = 0;
      for (let i = 0; i < c.times.length; i++) {
        const err = Math.abs(out[i] - c.concMgL[i]);
        const ratio = Number.isFinite(err) ? err / (relTol * Math.abs(c.concMgL[i]) + absFloor) : Infinity;
        if (!(ratio <= worstRatio)) {
          worstRatio = ratio;
          worstAt = i;
          worstRel = c.concMgL[i] !== 0 ? err / Math.abs(c.concMgL[i]) : err;
        }
      }
      rows.push({
        quantity: `${c.name}: worst of ${c.times.length} times (t = ${c.times[worstAt]} h)`,
        reference: c.concMgL[worstAt],
        found: out[worstAt],
        error: worstRel,
        limit: `relative <= ${fmt(relTol)} (+ ${fmt(absFloor)} mg/L)`,
        allowed: relTol,
        pass: ok && worstRatio <= 1,
      });
    }
    return { rows, found: summarise(rows, 'cases') };
  },
};

interface SteadyCase { name: string; model: StructureId; params: (number | null)[]; regimen: { doseMg: number; intervalH: number; durationH: number; route: 'infusion' }; auc24: number; trough: number; peak: number }

export const steadyStateMetrics: CheckKind = {
  describe: (t) => `relative error <= ${fmt(tol(t, 'relative'))} for AUC24, trough and peak`,
  async run(spec, ctx) {
    const ref = await ctx.files.readJson<{ steadyState: SteadyCase[] }>(spec.reference);
    if (!Array.isArray(ref.steadyState) || ref.steadyState.length === 0) throw new Error(`${spec.reference} holds no steadyState cases`);
    const limit = tol(spec.tolerance, 'relative');
    const rows: CheckRow[] = [];
    for (const c of ref.steadyState) {
      const model = getStructuralModel(c.model);
      const ev = buildSteadyStateEvaluator(model, c.regimen, { peakDelayH: 0, thresholdMgL: NaN, gridIntervals: 32 });
      const out = new Float64Array(5);
      const ok = ev.evaluate(toParams(c.params), out, 0);
      const r = [relativeRow(`${c.name}: AUC24 (mg.h/L)`, c.auc24, out[0], limit), relativeRow(`${c.name}: trough (mg/L)`, c.trough, out[1], limit), relativeRow(`${c.name}: peak (mg/L)`, c.peak, out[2], limit)];
      if (!ok) r.forEach((x) => (x.pass = false));
      rows.push(...r);
    }
    return { rows, found: summarise(rows, 'metrics') };
  },
};
