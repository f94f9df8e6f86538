/**
 * The stochastic Newton step of SAEM's numerical block (engine/saem/saem.ts): the components
 * without sufficient statistics (typical values and covariate effects of parameters without
 * BSV; combined-error log a and log b) move by theta <- theta + gamma Hbar^-1 grad of the
 * chain-averaged complete-data log-likelihood at the current draws (Robbins-Monro; by Fisher's
 * identity its fixed point solves the observed-data score equation). Gradient and Hessian come
 * from central finite differences of that objective (engine/optim's centralDerivatives: gradient
 * and Hessian from one shared stencil, step 1e-3 max(1, |x|)), or in closed form for combined
 * error alone. Hbar is the stochastic approximation of the Hessian; each move is capped at
 * max(1, |x| / 2) per component.
 *
 * The stencil is evaluated as one batch: a first walk of centralDerivatives records its points,
 * the subject blocks (engine/saem/threads.ts; one block on one thread) compute every chain's
 * log-likelihood at every point, and a second walk reads the values back. The predictions depend
 * only on the structural components of a point, and the stencil visits few structural points
 * (1 + 2 S + 2 S (S - 1) for S structural components), so each block predicts once per
 * structural point: with combined error and one parameter without BSV, 2 prediction passes
 * instead of 19 (the first point, theta's own, reuses the predictions the chains already hold).
 * The objective sums the chains' values in subject-then-chain order whatever the blocks, so
 * results do not depend on the number of threads.
 */
import type { CompiledModel, PopulationParameters } from '../stats/model.js';
import { choleskyLower, solveWithCholesky } from '../stats/dense.js';
import { combinedErrorDerivatives } from '../stats/residual.js';
import { centralDerivatives } from '../optim/finiteDifferences.js';
import { numericalComponents, readNumerical, writeNumerical, type NumericalComponent } from './layout.js';
import type { SimulationState } from './simulation.js';

export interface NewtonStep {
  /** The components it moves, in layout order. */
  readonly components: readonly NumericalComponent[];
  /** Whether any component is a structural parameter (then the chains' phi without BSV follow theta). */
  readonly structural: boolean;
  /** One step with step size gamma; theta is updated in place (left as is when the derivatives are not finite). */
  step(gamma: number): void;
}

/** Stencil points of one batch, at most 1 + 2n + 2n(n - 1) for n components. */
export function newtonBatchCapacity(nComponents: number): number {
  return 1 + 2 * nComponents + 2 * nComponents * (nComponents - 1);
}

/**
 * The batch of stencil points the blocks evaluate, in arrays every thread sees (shared memory
 * when blocks run on other threads). `counts` = [points, structural points].
 */
export interface NewtonBatchBuffers {
  /** points x components: each point's x. */
  readonly points: Float64Array;
  /** Per point: its structural point's index. */
  readonly pointStructural: Int32Array;
  /** Per structural point: the index of the first point that has it (its x gives the structural values). */
  readonly structuralFirstPoint: Int32Array;
  readonly counts: Int32Array;
  /** Per structural point: the chains' predictions (chains-per-subject x nObsTotal, subject-major). */
  readonly predictions: Float64Array;
  /** Per structural point and chain: 1 where the model accepted the chain's phi. */
  readonly valid: Uint8Array;
  /** points x all chains: the chain's log-likelihood at the point. */
  readonly logLik: Float64Array;
}

export interface NewtonBatchSizes {
  points: number;
  pointStructural: number;
  structuralFirstPoint: number;
  counts: number;
  predictions: number;
  valid: number;
  logLik: number;
}

export function newtonBatchSizes(model: CompiledModel, chains: number): NewtonBatchSizes {
  const { components, structural } = numericalComponents(model);
  const n = components.length;
  const capacity = n > 0 && (structural || model.residualModel !== 'combined') ? newtonBatchCapacity(n) : 0;
  const nS = components.filter((c) => c.kind === 'mu' || c.kind === 'beta').length;
  const structuralCapacity = capacity > 0 ? newtonBatchCapacity(nS) : 0;
  const NL = model.nSubjects * chains;
  return {
    points: capacity * n,
    pointStructural: capacity,
    structuralFirstPoint: structuralCapacity,
    counts: 2,
    predictions: structuralCapacity * chains * model.nObsTotal,
    valid: structuralCapacity * NL,
    logLik: capacity * NL,
  };
}

/** Allocate the batch arrays; over SharedArrayBuffers when `shared`. */
export function allocateNewtonBatch(model: CompiledModel, chains: number, shared: boolean): NewtonBatchBuffers {
  const z = newtonBatchSizes(model, chains);
  const f64 = (n: number) => (shared ? new Float64Array(new SharedArrayBuffer(8 * Math.max(1, n)), 0, n) : new Float64Array(n));
  const i32 = (n: number) => (shared ? new Int32Array(new SharedArrayBuffer(4 * Math.max(1, n)), 0, n) : new Int32Array(n));
  const u8 = (n: number) => (shared ? new Uint8Array(new SharedArrayBuffer(Math.max(1, n)), 0, n) : new Uint8Array(n));
  return {
    points: f64(z.points),
    pointStructural: i32(z.pointStructural),
    structuralFirstPoint: i32(z.structuralFirstPoint),
    counts: i32(z.counts),
    predictions: f64(z.predictions),
    valid: u8(z.valid),
    logLik: f64(z.logLik),
  };
}

/** A block's evaluator of the batch: every chain of the subjects [sim.from, sim.to) at every point. */
export interface NewtonBlock {
  evaluate(theta: PopulationParameters): void;
}

export function createNewtonBlock(model: CompiledModel, sim: SimulationState, batch: NewtonBatchBuffers): NewtonBlock {
  const p = model.nParams;
  const T = model.covariateTerms.length;
  const L = sim.chains;
  const NL = model.nSubjects * L;
  const subjects = model.subjects;
  const termParam = Int32Array.from(model.covariateTerms, (t) => t.parameterIndex);
  const hasEta = Uint8Array.from(model.parameters, (q) => (q.etaIndex >= 0 ? 1 : 0));
  const { components, structural } = numericalComponents(model);
  const n = components.length;
  const proposalPhi = new Float64Array(p);
  const meanPhiRow = new Float64Array(p);
  // Per structural point, one prediction view per chain over its slice of batch.predictions.
  const perPoint = L * model.nObsTotal;
  const views: Float64Array[][] = [];
  for (let e = 0; e < batch.structuralFirstPoint.length; e++) {
    const row: Float64Array[] = [];
    let offset = e * perPoint;
    for (const sub of subjects) for (let c = 0; c < L; c++, offset += sub.nObs) row.push(batch.predictions.subarray(offset, offset + sub.nObs));
    views.push(row);
  }

  function predictAt(theta: PopulationParameters, e: number): void {
    const x = batch.points.subarray(batch.structuralFirstPoint[e] * n, batch.structuralFirstPoint[e] * n + n);
    const valid = batch.valid;
    for (let i = sim.from; i < sim.to; i++) {
      // The mean of the components without BSV under x.
      for (let j = 0; j < p; j++) meanPhiRow[j] = hasEta[j] ? 0 : theta.mu[j];
      for (let m = 0; m < n; m++) if (components[m].kind === 'mu') meanPhiRow[components[m].index] = x[m];
      for (let t = 0; t < T; t++) {
        if (hasEta[termParam[t]]) continue;
        let coef = theta.beta[t];
        for (let m = 0; m < n; m++) if (components[m].kind === 'beta' && components[m].index === t) coef = x[m];
        meanPhiRow[termParam[t]] += coef * subjects[i].design[t];
      }
      for (let c = 0; c < L; c++) {
        const s = i * L + c;
        for (let j = 0; j < p; j++) proposalPhi[j] = hasEta[j] ? sim.phiByChain[s * p + j] : meanPhiRow[j];
        valid[e * NL + s] = model.predict(i, proposalPhi, views[e][s]) ? 1 : 0;
      }
    }
  }

  /**
   * The first point of a batch is theta's own: there every chain's phi is its current draw, whose
   * predictions the chain already holds (the same numbers predict would give). Only a chain whose
   * log-likelihood is not finite is predicted again, for its validity.
   */
  function currentPredictions(): void {
    const valid = batch.valid;
    for (let i = sim.from; i < sim.to; i++)
      for (let c = 0; c < L; c++) {
        const s = i * L + c;
        if (Number.isFinite(sim.logLikByChain[s])) {
          views[0][s].set(sim.predictionsByChain[s]);
          valid[s] = 1;
        } else valid[s] = model.predict(i, sim.phiByChain.subarray(s * p, s * p + p), views[0][s]) ? 1 : 0;
      }
  }

  return {
    evaluate(theta) {
      const nPoints = batch.counts[0];
      const nStructural = batch.counts[1];
      if (structural) for (let e = 0; e < nStructural; e++) (e === 0 ? currentPredictions() : predictAt(theta, e));
      for (let k = 0; k < nPoints; k++) {
        let a = theta.a;
        let b = theta.b;
        for (let m = 0; m < n; m++) {
          const kind = components[m].kind;
          if (kind === 'loga') a = Math.exp(batch.points[k * n + m]);
          else if (kind === 'logb') b = Math.exp(batch.points[k * n + m]);
        }
        const e = batch.pointStructural[k];
        const out = batch.logLik;
        for (let i = sim.from; i < sim.to; i++)
          for (let c = 0; c < L; c++) {
            const s = i * L + c;
            if (!structural) out[k * NL + s] = model.logLikFromPredictions(i, sim.predictionsByChain[s], a, b);
            else out[k * NL + s] = batch.valid[e * NL + s] ? model.logLikFromPredictions(i, views[e][s], a, b) : -Infinity;
          }
      }
    },
  };
}

/**
 * Build the step over `theta` (updated in place) and the chains of `sim`; `evaluateBatch` has
 * every block evaluate the batch in `batch` (see engine/saem/threads.ts). Scratch is allocated once here.
 */
export function createNewtonStep(
  model: CompiledModel,
  theta: PopulationParameters,
  sim: SimulationState,
  batch: NewtonBatchBuffers,
  evaluateBatch: () => void,
): NewtonStep {
  const N = model.nSubjects;
  const nChains = sim.chains;
  const NL = N * nChains;
  const subjects = model.subjects;
  const residualModel = model.residualModel;
  const { components: newtonComponents, structural: newtonHasStructural } = numericalComponents(model);
  const nNewton = newtonComponents.length;
  const structuralSlots = Int32Array.from(newtonComponents.flatMap((nc, m) => (nc.kind === 'mu' || nc.kind === 'beta' ? [m] : [])));
  const nS = structuralSlots.length;
  const newtonX = new Float64Array(nNewton);
  const newtonXShifted = new Float64Array(nNewton);
  const newtonGradient = new Float64Array(nNewton);
  const newtonHessian = new Float64Array(nNewton * nNewton);
  const newtonHessianApprox = new Float64Array(nNewton * nNewton);
  const negHessianApprox = new Float64Array(nNewton * nNewton);
  const negHessianCholesky = new Float64Array(nNewton * nNewton);
  const newtonDirection = new Float64Array(nNewton);
  const capacity = batch.pointStructural.length;

  /** First walk: record the point, value not yet known. */
  let nPoints = 0;
  let nStructural = 0;
  function recordPoint(x: Float64Array): number {
    if (nPoints >= capacity) throw new Error(`internal: the Newton stencil has more than ${capacity} points`);
    batch.points.set(x, nPoints * nNewton);
    // Its structural point: an earlier point's when the structural values are the same.
    let e = 0;
    for (; e < nStructural; e++) {
      const first = batch.structuralFirstPoint[e] * nNewton;
      let same = true;
      for (let q = 0; q < nS && same; q++) same = batch.points[first + structuralSlots[q]] === x[structuralSlots[q]];
      if (same) break;
    }
    if (e === nStructural) batch.structuralFirstPoint[nStructural++] = nPoints;
    batch.pointStructural[nPoints++] = e;
    return 0;
  }
  /** Second walk: the objective at the k-th point, the chains summed in subject-then-chain order. */
  let replayed = 0;
  function replayPoint(): number {
    const base = replayed++ * NL;
    const ll = batch.logLik;
    let total = 0;
    for (let s = 0; s < NL; s++) total += ll[base + s];
    return total / nChains;
  }

  /** Gradient and Hessian of the numerical block's objective by central differences (engine/optim). */
  const newtonStepOf = (xi: number): number => 1e-3 * Math.max(1, Math.abs(xi));
  function newtonFiniteDifferences(): boolean {
    nPoints = 0;
    nStructural = 0;
    centralDerivatives(recordPoint, newtonX, newtonGradient, newtonHessian, newtonXShifted, newtonStepOf);
    batch.counts[0] = nPoints;
    batch.counts[1] = newtonHasStructural ? nStructural : 0;
    evaluateBatch();
    replayed = 0;
    const objectiveAtX = centralDerivatives(replayPoint, newtonX, newtonGradient, newtonHessian, newtonXShifted, newtonStepOf);
    if (!Number.isFinite(objectiveAtX)) return false;
    for (let q = 0; q < nNewton * nNewton; q++) if (!Number.isFinite(newtonHessian[q])) return false;
    for (let m = 0; m < nNewton; m++) if (!Number.isFinite(newtonGradient[m])) return false;
    return true;
  }

  /** Combined error alone: analytic gradient and Hessian in (log a, log b), one pass over the levels. */
  const combinedDerivativeScratch = new Float64Array(6);
  function combinedErrorNewtonDerivatives(): boolean {
    newtonGradient.fill(0);
    newtonHessian.fill(0);
    const invChains = 1 / nChains;
    for (let i = 0; i < N; i++) {
      const sub = subjects[i];
      for (let c = 0; c < nChains; c++) {
        const f = sim.predictionsByChain[i * nChains + c];
        for (let o = 0; o < sub.nObs; o++) {
          if (!combinedErrorDerivatives(theta.a, theta.b, sub.y[o], f[o], sub.censored[o] === 1, sub.lloqMgL[o], combinedDerivativeScratch)) continue;
          newtonGradient[0] += combinedDerivativeScratch[1] * invChains;
          newtonGradient[1] += combinedDerivativeScratch[2] * invChains;
          newtonHessian[0] += combinedDerivativeScratch[3] * invChains;
          newtonHessian[3] += combinedDerivativeScratch[4] * invChains;
          newtonHessian[1] += combinedDerivativeScratch[5] * invChains;
        }
      }
    }
    newtonHessian[2] = newtonHessian[1];
    for (let q = 0; q < 4; q++) if (!Number.isFinite(newtonHessian[q])) return false;
    return Number.isFinite(newtonGradient[0]) && Number.isFinite(newtonGradient[1]);
  }

  function newtonStep(gamma: number): void {
    readNumerical(newtonComponents, theta, newtonX);
    if (!newtonHasStructural && residualModel === 'combined') {
      if (!combinedErrorNewtonDerivatives()) return;
    } else if (!newtonFiniteDifferences()) return;
    for (let q = 0; q < nNewton * nNewton; q++) newtonHessianApprox[q] += gamma * (newtonHessian[q] - newtonHessianApprox[q]);
    for (let q = 0; q < nNewton * nNewton; q++) negHessianApprox[q] = -newtonHessianApprox[q];
    newtonDirection.set(newtonGradient);
    if (choleskyLower(negHessianApprox, nNewton, negHessianCholesky)) solveWithCholesky(negHessianCholesky, nNewton, newtonDirection);
    else for (let m = 0; m < nNewton; m++) newtonDirection[m] = newtonGradient[m] / Math.max(Math.abs(newtonHessianApprox[m * nNewton + m]), 1e-8);
    for (let m = 0; m < nNewton; m++) {
      const cap = Math.max(1, Math.abs(newtonX[m]) * 0.5);
      const d = Math.max(-cap, Math.min(cap, newtonDirection[m]));
      writeNumerical(newtonComponents[m], newtonX[m] + gamma * d, theta);
    }
  }

  return { components: newtonComponents, structural: newtonHasStructural, step: newtonStep };
}
