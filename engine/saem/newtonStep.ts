/**
 * The stochastic Newton step of SAEM's numerical block (engine/saem/saem.ts): the components
 * without sufficient statistics (typical values and covariate effects of parameters without
 * BSV; combined-error log a and log b) move by theta <- theta + gamma Hbar^-1 grad of the
 * chain-averaged complete-data log-likelihood at the current draws (Robbins-Monro; by Fisher's
 * identity its fixed point solves the observed-data score equation). Gradient and Hessian come
 * from central finite differences of that objective (engine/optim's centralDerivatives: gradient
 * and Hessian from one shared stencil, step 1e-3 max(1, |x|)), or in closed form for combined
 * error alone. Hbar is the stochastic
 * approximation of the Hessian; each move is capped at max(1, |x| / 2) per component.
 *
 * The predictions depend only on the structural components of x, and the finite-difference
 * stencil visits few structural points (1 + 2 S + 2 S (S - 1) for S structural components, against
 * 1 + 2 n + 2 n (n - 1) stencil points for n components), so the objective keeps the chains'
 * predictions per structural point for one step: with combined error and one parameter without
 * BSV, 3 prediction passes instead of 19. Same numbers to the last bit (the same predictions
 * summed in the same order).
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

/** Build the step over `theta` (updated in place) and the chains of `sim`; its scratch is allocated once here. */
export function createNewtonStep(model: CompiledModel, theta: PopulationParameters, sim: SimulationState): NewtonStep {
  const N = model.nSubjects;
  const p = model.nParams;
  const T = model.covariateTerms.length;
  const nChains = sim.chains;
  const subjects = model.subjects;
  const residualModel = model.residualModel;
  const termParam = Int32Array.from(model.covariateTerms, (t) => t.parameterIndex);
  const hasEta = Uint8Array.from(model.parameters, (q) => (q.etaIndex >= 0 ? 1 : 0));
  const { components: newtonComponents, structural: newtonHasStructural } = numericalComponents(model);
  const nNewton = newtonComponents.length;
  const newtonX = new Float64Array(nNewton);
  const newtonGradient = new Float64Array(nNewton);
  const newtonHessian = new Float64Array(nNewton * nNewton);
  const newtonHessianApprox = new Float64Array(nNewton * nNewton);
  const negHessianApprox = new Float64Array(nNewton * nNewton);
  const negHessianCholesky = new Float64Array(nNewton * nNewton);
  const newtonDirection = new Float64Array(nNewton);
  const proposalPhi = new Float64Array(p);
  const meanPhiRow = new Float64Array(p);
  const structuralSlots = Int32Array.from(newtonComponents.flatMap((nc, m) => (nc.kind === 'mu' || nc.kind === 'beta' ? [m] : [])));
  const predictionCache = createPredictionCache(model, nChains, structuralSlots);

  /** Complete-data log-likelihood of the numerical block at newtonX (chain-averaged). */
  function newtonObjective(x: Float64Array): number {
    let a = theta.a;
    let b = theta.b;
    for (let m = 0; m < nNewton; m++) {
      const nc = newtonComponents[m];
      if (nc.kind === 'loga') a = Math.exp(x[m]);
      else if (nc.kind === 'logb') b = Math.exp(x[m]);
    }
    let total = 0;
    const entry = newtonHasStructural ? predictionCache.entryFor(x) : null;
    if (entry && entry.filled) {
      for (let i = 0; i < N; i++)
        for (let c = 0; c < nChains; c++) {
          const s = i * nChains + c;
          total += entry.valid[s] ? model.logLikFromPredictions(i, entry.predictions[s], a, b) : -Infinity;
        }
      return total / nChains;
    }
    for (let i = 0; i < N; i++) {
      if (newtonHasStructural) {
        // mean of the non-BSV components under x
        for (let j = 0; j < p; j++) meanPhiRow[j] = hasEta[j] ? 0 : theta.mu[j];
        for (let m = 0; m < nNewton; m++) if (newtonComponents[m].kind === 'mu') meanPhiRow[newtonComponents[m].index] = x[m];
        for (let t = 0; t < T; t++) {
          if (hasEta[termParam[t]]) continue;
          let coef = theta.beta[t];
          for (let m = 0; m < nNewton; m++) if (newtonComponents[m].kind === 'beta' && newtonComponents[m].index === t) coef = x[m];
          meanPhiRow[termParam[t]] += coef * subjects[i].design[t];
        }
      }
      for (let c = 0; c < nChains; c++) {
        const s = i * nChains + c;
        let ll: number;
        if (newtonHasStructural) {
          for (let j = 0; j < p; j++) proposalPhi[j] = hasEta[j] ? sim.phiByChain[s * p + j] : meanPhiRow[j];
          const f = entry!.predictions[s];
          const valid = model.predict(i, proposalPhi, f);
          entry!.valid[s] = valid ? 1 : 0;
          ll = valid ? model.logLikFromPredictions(i, f, a, b) : -Infinity;
        } else ll = model.logLikFromPredictions(i, sim.predictionsByChain[s], a, b);
        total += ll;
      }
    }
    if (entry) entry.filled = true;
    return total / nChains;
  }

  /** Gradient and Hessian of the numerical block's objective by central differences (engine/optim). */
  const newtonStepOf = (xi: number): number => 1e-3 * Math.max(1, Math.abs(xi));
  function newtonFiniteDifferences(): boolean {
    const objectiveAtX = centralDerivatives(newtonObjective, newtonX, newtonGradient, newtonHessian, newtonXShifted, newtonStepOf);
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

  const newtonXShifted = new Float64Array(nNewton);
  function newtonStep(gamma: number): void {
    predictionCache.clear();
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

/** The chains' predictions at one structural point of the stencil. */
interface CachedPredictions {
  readonly key: Float64Array;
  /** Predictions filled for every chain (entries are filled by one whole pass). */
  filled: boolean;
  /** 1 where the model accepted the chain's phi. */
  readonly valid: Uint8Array;
  /** One view per chain (subject * chains + chain). */
  readonly predictions: Float64Array[];
}

/**
 * Predictions per structural point, valid for one Newton step (cleared at its start, as the
 * chains move between steps). Entries are allocated once, up to the stencil's number of
 * structural points; the key is compared exactly, so a point is reused only when it is the same.
 */
function createPredictionCache(model: CompiledModel, nChains: number, structuralSlots: Int32Array) {
  const nS = structuralSlots.length;
  const capacity = 1 + 2 * nS + 2 * nS * (nS - 1);
  const entries: CachedPredictions[] = [];
  let used = 0;
  const allocate = (): CachedPredictions => {
    const buffer = new Float64Array(nChains * model.nObsTotal);
    const predictions: Float64Array[] = [];
    let offset = 0;
    for (const sub of model.subjects)
      for (let c = 0; c < nChains; c++, offset += sub.nObs) predictions.push(buffer.subarray(offset, offset + sub.nObs));
    return { key: new Float64Array(nS), filled: false, valid: new Uint8Array(model.nSubjects * nChains), predictions };
  };
  return {
    clear(): void {
      used = 0;
    },
    /** The entry of x's structural point: a filled one when cached, else a fresh one to fill. */
    entryFor(x: Float64Array): CachedPredictions {
      for (let e = 0; e < used; e++) {
        const key = entries[e].key;
        let same = true;
        for (let q = 0; q < nS && same; q++) same = key[q] === x[structuralSlots[q]];
        if (same) return entries[e];
      }
      // Beyond the stencil's count (not expected), the oldest entry is reused.
      const slot = used < capacity ? used++ : 0;
      if (slot === entries.length) entries.push(allocate());
      const entry = entries[slot];
      for (let q = 0; q < nS; q++) entry.key[q] = x[structuralSlots[q]];
      entry.filled = false;
      return entry;
    },
  };
}
