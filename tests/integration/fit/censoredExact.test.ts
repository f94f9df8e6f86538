/**
 * Censored levels against an exact maximum-likelihood reference computed here: simulated data
 * (invented, labelled as such), one-compartment IV bolus, BSV on CL only, V fixed, additive
 * error, about a third of the levels below the LLOQ. The marginal likelihood of each subject is
 * a one-dimensional integral over its random effect, done by the trapezoid rule on a fine grid
 * (400 points over +-8 SD, common practice), with censored levels as P(Y < LLOQ); the MLE by
 * Nelder-Mead (Nelder & Mead 1965, from memory). SAEM (with imputation of the censored levels
 * in its simulation step) must land on it.
 */
import { describe, expect, it } from 'vitest';
import type { Dose } from '../../../engine/data/types.js';
import { logNormalCdf } from '../../../engine/rng/index.js';
import { runSaem } from '../../../engine/saem/saem.js';
import { parseModelSpec } from '../../../engine/spec/modelSpec.js';
import { compileModel } from '../../../engine/stats/model.js';
import { simulateDataset, type SimSubjectDesign } from '../../unit/saem/simulate.js';

const VTRUE = 20;
const V = VTRUE;
const designs: SimSubjectDesign[] = Array.from({ length: 40 }, (_, i) => ({
  id: `C${i + 1}`,
  covariates: {},
  doses: [{ timeH: 0, amountMg: 100, route: 'bolus', durationH: 0 } as Dose],
  timesH: [1, 4, 8, 12],
}));
const truth = parseModelSpec({
  structure: '1cmt',
  parameters: { CL: { typical: 2, bsv: 0.4 }, V: { typical: V, bsv: null, fixed: true } },
  residual: { model: 'additive', a: 0.3 },
});
const LLOQ = 2;
const data = simulateDataset(truth, designs, 31, LLOQ);

/** Exact -2 log-likelihood at (log CL, log omega, log a[, log V]). */
function minus2LL(x: readonly number[]): number {
  const [lcl, lom, la] = x;
  const V = x.length > 3 ? Math.exp(x[3]) : VTRUE;
  const om = Math.exp(lom);
  const a = Math.exp(la);
  let total = 0;
  const G = 400;
  for (const s of data.subjects) {
    let sum = 0;
    for (let g = 0; g <= G; g++) {
      const z = -8 + (16 * g) / G;
      const cl = Math.exp(lcl + om * z);
      let ll = -0.5 * z * z - 0.5 * Math.log(2 * Math.PI);
      for (const o of s.observations) {
        const f = (100 / V) * Math.exp((-cl / V) * o.timeH);
        if (o.censored) ll += logNormalCdf((LLOQ - f) / a);
        else ll += -0.5 * ((o.valueMgL - f) / a) ** 2 - Math.log(a) - 0.5 * Math.log(2 * Math.PI);
      }
      sum += (g === 0 || g === G ? 0.5 : 1) * Math.exp(ll);
    }
    total += Math.log((sum * 16) / G);
  }
  return -2 * total;
}

function nelderMead(fn: (x: number[]) => number, start: number[], step = 0.2, iterations = 400): number[] {
  const n = start.length;
  let simplex = [start, ...start.map((_, i) => start.map((v, j) => (i === j ? v + step : v)))].map((x) => ({ x, f: fn(x) }));
  for (let it = 0; it < iterations; it++) {
    simplex.sort((p, q) => p.f - q.f);
    const centroid = start.map((_, j) => simplex.slice(0, n).reduce((s, p) => s + p.x[j], 0) / n);
    const worst = simplex[n];
    const at = (t: number) => centroid.map((c, j) => c + t * (worst.x[j] - c));
    const r = at(-1);
    const fr = fn(r);
    if (fr < simplex[0].f) {
      const e = at(-2);
      const fe = fn(e);
      simplex[n] = fe < fr ? { x: e, f: fe } : { x: r, f: fr };
    } else if (fr < simplex[n - 1].f) simplex[n] = { x: r, f: fr };
    else {
      const c = at(0.5);
      const fc = fn(c);
      if (fc < worst.f) simplex[n] = { x: c, f: fc };
      else simplex = simplex.map((p, k) => (k === 0 ? p : { x: p.x.map((v, j) => simplex[0].x[j] + 0.5 * (v - simplex[0].x[j])), f: NaN })).map((p) => ({ x: p.x, f: Number.isNaN(p.f) ? fn(p.x) : p.f }));
    }
    if (Math.abs(simplex[n].f - simplex[0].f) < 1e-10) break;
  }
  simplex.sort((p, q) => p.f - q.f);
  return simplex[0].x;
}

describe('censored levels: SAEM against the exact MLE (simulated data)', () => {
  it('lands on the exact censored-likelihood MLE', async () => {
    let censored = 0;
    let total = 0;
    for (const s of data.subjects) for (const o of s.observations) (total += 1), (censored += o.censored ? 1 : 0);
    expect(censored / total).toBeGreaterThan(0.2);
    const mle = nelderMead(minus2LL, [Math.log(1.5), Math.log(0.3), Math.log(0.5)]);
    const polished = nelderMead(minus2LL, mle, 0.02);
    const [cl, om, a] = polished.map(Math.exp);
    const start = parseModelSpec({ ...truth, parameters: { CL: { typical: 1, bsv: 0.8 }, V: { typical: V, bsv: null, fixed: true } }, residual: { model: 'additive', a: 1 } });
    const r = await runSaem(compileModel(start, data), { seed: 8, settings: { chains: 5, averagingIterations: 300 } });
    const e = (n: string) => r.estimates[r.estimateNames.indexOf(n)];
    console.log(`censored ${(100 * censored / total).toFixed(0)} %; exact MLE CL ${cl.toFixed(4)} omega ${om.toFixed(4)} a ${a.toFixed(4)}; SAEM ${e('CL').toFixed(4)} ${e('bsv_CL').toFixed(4)} ${e('residual_additive_mg_L').toFixed(4)}`);
    expect(Math.abs(e('CL') / cl - 1)).toBeLessThan(0.02);
    expect(Math.abs(e('bsv_CL') / om - 1)).toBeLessThan(0.1);
    expect(Math.abs(e('residual_additive_mg_L') / a - 1)).toBeLessThan(0.05);
  }, 120_000);

  it('a structural parameter without BSV (V, estimated by the stochastic Newton step) lands on the exact MLE too', async () => {
    const mle = nelderMead(minus2LL, [Math.log(1.5), Math.log(0.3), Math.log(0.5), Math.log(25)], 0.2, 800);
    const polished = nelderMead(minus2LL, mle, 0.02, 800);
    const [cl, om, a, v] = polished.map(Math.exp);
    const start = parseModelSpec({ ...truth, parameters: { CL: { typical: 1, bsv: 0.8 }, V: { typical: 30, bsv: null } }, residual: { model: 'additive', a: 1 } });
    const r = await runSaem(compileModel(start, data), { seed: 8, settings: { chains: 5, averagingIterations: 300 } });
    const e = (n: string) => r.estimates[r.estimateNames.indexOf(n)];
    console.log(`exact MLE CL ${cl.toFixed(4)} omega ${om.toFixed(4)} a ${a.toFixed(4)} V ${v.toFixed(3)}; SAEM ${e('CL').toFixed(4)} ${e('bsv_CL').toFixed(4)} ${e('residual_additive_mg_L').toFixed(4)} ${e('V').toFixed(3)}`);
    expect(Math.abs(e('V') / v - 1)).toBeLessThan(0.02);
    expect(Math.abs(e('CL') / cl - 1)).toBeLessThan(0.02);
    expect(Math.abs(e('bsv_CL') / om - 1)).toBeLessThan(0.1);
    expect(Math.abs(e('residual_additive_mg_L') / a - 1)).toBeLessThan(0.05);
  }, 180_000);
});
