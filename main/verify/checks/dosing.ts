/**
 * Bayesian dose advice: the patient's MAP estimate against scipy's optimiser and the posterior
 * draws against exact grid integration (reference/dosing/map_posterior_scipy.json).
 */
import { parsePatient } from '../../../engine/dosing/patient.js';
import { populationModelFromSpec } from '../../../engine/dosing/population.js';
import { buildLevelObjective, findMap, samplePosterior } from '../../../engine/dosing/posterior.js';
import { buildPatientPrior } from '../../../engine/dosing/prior.js';
import { getStructuralModel } from '../../../engine/models/catalogue.js';
import type { StructureId } from '../../../engine/models/types.js';
import { createStreams } from '../../../engine/rng/index.js';
import { parseModelSpec } from '../../../engine/spec/modelSpec.js';
import { absoluteRow, fmt, relativeRow, summarise, tol, type CheckKind } from './common.js';
import type { CheckRow } from '../types.js';

interface RefPatient { model: { structure: StructureId; residual: { model: string } } & Record<string, unknown>; patient: { id: string } & Record<string, unknown>; map: Record<string, number> }
interface RefFile {
  patients: RefPatient[];
  patients2cmt: RefPatient[];
  gridPosterior: { patientIndex: number; CL: GridSummary; V: GridSummary };
}
interface GridSummary { mean: number; sd: number; q05: number; q95: number; densityAtQ05: number; densityAtQ95: number }

function setup(c: RefPatient) {
  const population = populationModelFromSpec(parseModelSpec(c.model));
  const patient = parsePatient(c.patient);
  const prior = buildPatientPrior(population, new Map(Object.entries(patient.covariates)), getStructuralModel(c.model.structure));
  return { prior, obj: buildLevelObjective(prior, patient.doses, patient.levels) };
}

export const dosingMap: CheckKind = {
  describe: (t) => `relative error <= ${fmt(tol(t, 'relative'))} in the MAP CL and V; the posterior objective at the reference optimum within ${fmt(tol(t, 'objectiveAbsolute'))}; the optimiser converged`,
  async run(spec, ctx) {
    const ref = await ctx.files.readJson<RefFile>(spec.reference);
    const limit = tol(spec.tolerance, 'relative');
    const objLimit = tol(spec.tolerance, 'objectiveAbsolute');
    const rows: CheckRow[] = [];
    for (const c of [...ref.patients, ...ref.patients2cmt]) {
      const { prior, obj } = setup(c);
      const map = findMap(obj, prior);
      const label = `patient ${c.patient.id} (${c.model.structure}, ${c.model.residual.model} error)`;
      const names = c.model.structure === '2cmt' ? ['CL', 'V1'] : ['CL', 'V'];
      rows.push({ quantity: `${label}: optimiser converged`, reference: 'yes', found: map.converged ? 'yes' : 'no', pass: map.converged });
      names.forEach((n, i) => rows.push(relativeRow(`${label}: MAP ${n}`, c.map[n], prior.typical[n] * Math.exp(map.eta[i]), limit)));
      const etaRef = Float64Array.from(names.map((n) => c.map[`eta${n}`]));
      rows.push(absoluteRow(`${label}: objective at the reference optimum`, c.map.objective, obj.objective(etaRef), objLimit));
    }
    return { rows, found: summarise(rows, 'values') };
  },
};

export const dosingGrid: CheckKind = {
  describe: (t) =>
    `mean and 5 % / 95 % quantiles of CL and V within ${fmt(tol(t, 'mcErrorMultiple'))} Monte Carlo standard errors of the grid values (SD/sqrt(ESS) for the mean, sqrt(p(1-p)/ESS)/density for a quantile); R-hat <= ${fmt(tol(t, 'rhatMax'))}`,
  async run(spec, ctx) {
    const ref = await ctx.files.readJson<RefFile>(spec.reference);
    const g = ref.gridPosterior;
    const k = tol(spec.tolerance, 'mcErrorMultiple');
    const seed = typeof spec.seed === 'number' ? spec.seed : 1;
    const nDraws = typeof spec.draws === 'number' ? spec.draws : 8000;
    const chains = typeof spec.chains === 'number' ? spec.chains : 4;
    const { prior, obj } = setup(ref.patients[g.patientIndex]);
    const map = findMap(obj, prior);
    const draws = samplePosterior(obj, prior, map, createStreams(seed).stream('ref'), { nDraws, chains });
    const rows: CheckRow[] = [];
    const rhat = Math.max(...draws.diagnostics.rhat);
    rows.push({ quantity: 'largest R-hat of the chains', reference: 1, found: rhat, error: rhat - 1, limit: `<= ${fmt(tol(spec.tolerance, 'rhatMax'))}`, allowed: tol(spec.tolerance, 'rhatMax') - 1, pass: rhat <= tol(spec.tolerance, 'rhatMax') });
    (['CL', 'V'] as const).forEach((name, i) => {
      const ess = draws.diagnostics.ess[i];
      const values = new Float64Array(draws.nDraws);
      for (let d = 0; d < draws.nDraws; d++) values[d] = prior.typical[name] * Math.exp(draws.eta[d * 2 + i]);
      const mean = values.reduce((a, b) => a + b, 0) / values.length;
      const sorted = values.slice().sort();
      const q = (p: number) => sorted[Math.floor((sorted.length - 1) * p)];
      const r = g[name];
      const qSe = Math.sqrt((0.05 * 0.95) / ess);
      rows.push(absoluteRow(`posterior mean of ${name}`, r.mean, mean, (k * r.sd) / Math.sqrt(ess)));
      rows.push(absoluteRow(`5 % quantile of ${name}`, r.q05, q(0.05), (k * qSe) / r.densityAtQ05));
      rows.push(absoluteRow(`95 % quantile of ${name}`, r.q95, q(0.95), (k * qSe) / r.densityAtQ95));
    });
    return { rows, found: summarise(rows, 'values') };
  },
};
