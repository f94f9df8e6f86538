/**
 * The work behind `plateau simulate`: per subject, individual parameters (typical values from
 * the spec and covariates, per-subject values from columns named like a parameter, and with
 * --variability a between-subject draw), predicted concentrations at the level times and on an
 * optional grid, and with --variability residual error on the levels.
 */
import { createDataset, type SubjectInput } from '../../engine/data/dataset.js';
import { DataError, type DataProblem, type Dataset, type Observation } from '../../engine/data/types.js';
import { cholesky, multiplyLowerVector } from '../../engine/linalg/index.js';
import { structuralModelWithSolver } from '../../engine/models/catalogue.js';
import type { PkParameterName, StructuralModel } from '../../engine/models/types.js';
import { createStreams } from '../../engine/rng/index.js';
import {
  checkIndividualParameters,
  CovariateValueError,
  parameterOverridesFromCovariates,
  toModelVector,
  naturalToTransformed,
  transformedToNatural,
  typicalIndividualParameters,
} from '../../engine/spec/individual.js';
import { SpecError, type ModelSpec } from '../../engine/spec/modelSpec.js';

export interface TimeGrid {
  startH: number;
  stepH: number;
  endH: number;
}

/** Parse `start:step:end` (hours); throws an Error saying what is wrong. */
export function parseTimeGrid(text: string): TimeGrid {
  const parts = text.split(':');
  const nums = parts.map((p) => (p.trim() === '' ? NaN : Number(p)));
  if (parts.length !== 3 || nums.some((x) => !Number.isFinite(x))) throw new Error(`--times must be start:step:end in hours, e.g. 0:0.5:48; got "${text}"`);
  const [startH, stepH, endH] = nums;
  if (startH < 0) throw new Error(`--times: start must be >= 0, got ${startH}`);
  if (!(stepH > 0)) throw new Error(`--times: step must be > 0, got ${stepH}`);
  if (endH < startH) throw new Error(`--times: end (${endH}) is before start (${startH})`);
  if ((endH - startH) / stepH > 1e6) throw new Error('--times: more than a million grid points; use a larger step');
  return { startH, stepH, endH };
}

/** Grid points over all subjects at most (about 16 bytes each in the output): larger work is refused up front. */
export const MAX_TOTAL_GRID_POINTS = 2_000_000;

/** Number of points of a grid. */
export function gridPointCount(g: TimeGrid): number {
  return Math.floor((g.endH - g.startH) / g.stepH + 1e-9) + 1;
}

export function gridTimes(g: TimeGrid): Float64Array {
  const n = Math.floor((g.endH - g.startH) / g.stepH + 1e-9) + 1;
  const t = new Float64Array(n);
  // Multiply rather than accumulate, so the grid has no drift (0.1 * 30 not 0.1 + 0.1 + ...).
  for (let k = 0; k < n; k++) t[k] = Number((g.startH + k * g.stepH).toPrecision(15));
  return t;
}

export interface SimulateOptions {
  grid?: TimeGrid;
  /** Draw between-subject and residual variability (needs a seed). */
  variability?: boolean;
  seed?: number;
}

export interface SubjectSimulation {
  id: string;
  /** Natural-scale parameters used, by name (model parameters only). */
  parameters: Record<string, number>;
  /** Where each parameter came from. */
  parameterSource: Record<string, 'spec' | 'data' | 'spec+bsv' | 'default'>;
  /** Model prediction at each level time (mg/L). */
  predictedMgL: Float64Array;
  /** Simulated observation (with residual error) at each level, when variability is on. */
  simulatedMgL?: Float64Array;
  gridTimesH?: Float64Array;
  gridMgL?: Float64Array;
}

export interface SimulationResult {
  model: StructuralModel;
  subjects: SubjectSimulation[];
  /** The dataset with levels replaced by the predictions (or simulated values). */
  output: Dataset;
}

/** Cholesky factor of Omega (transformed scale) over the parameters with BSV, or a SpecError. */
function omegaFactor(spec: ModelSpec, names: PkParameterName[]): Float64Array {
  const n = names.length;
  const omega = new Float64Array(n * n);
  const sd = names.map((p) => spec.parameters[p]!.bsv as number);
  for (let i = 0; i < n; i++) omega[i * n + i] = sd[i] * sd[i];
  const index = new Map(names.map((p, i) => [p, i]));
  for (const block of spec.correlations) {
    for (const a of block) {
      for (const b of block) {
        if (a === b) continue;
        const r = spec.correlationValues?.[`${a},${b}`] ?? spec.correlationValues?.[`${b},${a}`] ?? 0;
        const i = index.get(a);
        const j = index.get(b);
        if (i !== undefined && j !== undefined) omega[i * n + j] = r * sd[i] * sd[j];
      }
    }
  }
  const l = new Float64Array(n * n);
  if (!cholesky(omega, n, l)) throw new SpecError(['correlationValues: the correlations do not form a valid (positive-definite) matrix; lower them']);
  return l;
}

function residualDraw(spec: ModelSpec, f: number, eps: number): number {
  const { model, a = 0, b = 0 } = spec.residual;
  if (model === 'log-additive') return f * Math.exp(a * eps);
  const sd = model === 'additive' ? a : model === 'proportional' ? b * Math.abs(f) : Math.sqrt(a * a + b * b * f * f);
  return f + sd * eps;
}

export function simulateDataset(spec: ModelSpec, dataset: Dataset, options: SimulateOptions = {}): SimulationResult {
  const model = structuralModelWithSolver(spec.structure, spec.solver);
  const problems: DataProblem[] = [];
  const grid = options.grid ? gridTimes(options.grid) : undefined;
  const bsvNames = model.parameterOrder.filter((p) => spec.parameters[p]?.bsv != null) as PkParameterName[];
  const lOmega = options.variability && bsvNames.length ? omegaFactor(spec, bsvNames) : undefined;
  const root = options.variability ? createStreams(options.seed ?? 1) : undefined;
  const subjects: SubjectSimulation[] = [];
  const outInputs: SubjectInput[] = [];

  for (const s of dataset.subjects) {
    let values: Record<PkParameterName, number>;
    try {
      values = typicalIndividualParameters(spec, s.covariates, s.id, model);
    } catch (e) {
      if (e instanceof CovariateValueError) {
        problems.push({ subject: s.id, field: e.covariate, message: e.reason });
        continue;
      }
      throw e;
    }
    const source: Record<string, 'spec' | 'data' | 'spec+bsv' | 'default'> = Object.create(null);
    for (const p of model.parameterOrder) source[p] = spec.parameters[p] ? 'spec' : 'default';

    if (lOmega && root) {
      const z = new Float64Array(bsvNames.length);
      root.stream('simulate', 'eta', s.id).fillNormal(z);
      const eta = new Float64Array(bsvNames.length);
      multiplyLowerVector(lOmega, bsvNames.length, z, eta);
      bsvNames.forEach((p, i) => {
        const t = spec.parameters[p]!.transform;
        values[p] = transformedToNatural(t, naturalToTransformed(t, values[p]) + eta[i]);
        source[p] = 'spec+bsv';
      });
    }

    const overrides = parameterOverridesFromCovariates(model, s.covariates);
    let bad = false;
    for (const [name, v] of Object.entries(overrides) as [PkParameterName, number | string][]) {
      if (typeof v !== 'number') {
        problems.push({ subject: s.id, field: name, message: `column ${name} gives this subject's ${name} and must be a number, got "${v}"` });
        bad = true;
        continue;
      }
      values[name] = v;
      source[name] = 'data';
    }
    for (const p of checkIndividualParameters(model, values, s.doses)) {
      problems.push({ subject: s.id, field: p.parameter, message: p.message });
      bad = true;
    }
    if (bad) continue;

    const nObs = s.observations.length;
    const nGrid = grid ? grid.length : 0;
    const times = new Float64Array(nObs + nGrid);
    s.observations.forEach((o, k) => (times[k] = o.timeH));
    if (grid) times.set(grid, nObs);
    const out = new Float64Array(times.length);
    const ok = times.length === 0 || model.prepare(s.doses, times)(toModelVector(model, values), out);
    if (!ok) {
      const shown = model.parameterOrder.map((p) => `${p}=${values[p]}`).join(', ');
      problems.push({ subject: s.id, message: `the model could not be evaluated with ${shown}; check the parameter values` });
      continue;
    }
    const predictedMgL = out.slice(0, nObs);
    // Absorption parameters mean nothing for a subject without oral doses: not reported.
    const used = s.doses.some((d) => d.route === 'oral') ? model.parameterOrder : model.parameterOrder.filter((p) => p !== 'ka' && p !== 'tlag' && p !== 'F');
    const parameters: Record<string, number> = {};
    const parameterSource: SubjectSimulation['parameterSource'] = {};
    for (const p of used) {
      parameters[p] = values[p];
      parameterSource[p] = source[p];
    }
    const sim: SubjectSimulation = { id: s.id, parameters, parameterSource, predictedMgL };
    if (grid) {
      sim.gridTimesH = grid;
      sim.gridMgL = out.slice(nObs);
    }
    let observations: Observation[];
    if (root) {
      const eps = new Float64Array(nObs);
      root.stream('simulate', 'residual', s.id).fillNormal(eps);
      const y = new Float64Array(nObs);
      observations = s.observations.map((o, k) => {
        y[k] = residualDraw(spec, predictedMgL[k], eps[k]);
        const below = o.lloqMgL !== undefined && y[k] < o.lloqMgL;
        return {
          timeH: o.timeH,
          valueMgL: below ? (o.lloqMgL as number) : y[k],
          censored: below,
          ...(o.lloqMgL !== undefined ? { lloqMgL: o.lloqMgL } : {}),
        };
      });
      sim.simulatedMgL = y;
    } else {
      observations = s.observations.map((o, k) => ({
        timeH: o.timeH,
        valueMgL: predictedMgL[k],
        censored: false,
        ...(o.lloqMgL !== undefined ? { lloqMgL: o.lloqMgL } : {}),
      }));
    }
    subjects.push(sim);
    outInputs.push({ id: s.id, covariates: { ...s.covariates }, doses: s.doses.map((d) => ({ ...d })), observations });
  }

  if (problems.length) throw new DataError(problems);
  return { model, subjects, output: createDataset(outInputs, dataset.covariateNames) };
}
