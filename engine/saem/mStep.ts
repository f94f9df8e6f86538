/**
 * Sufficient statistics and the closed-form M-step of SAEM (engine/saem/saem.ts).
 *
 * Statistics (chain-averaged, at the current draws): S_zphi = sum_i z_i phi_i' with design rows
 * z_i = [1, x_i], S_phiphi = sum_i phi_i phi_i' over the BSV components, and the sum of squared
 * residuals on the scale of the residual model. Their stochastic approximations
 * s_k = s_{k-1} + gamma_k (S_k - s_{k-1}) feed the M-step: typical values and covariate effects
 * of parameters with BSV by GLS with weights W = Omega_{k-1}^-1, Omega from the second moments
 * within the chosen blocks, additive / proportional / log-additive residual variance in closed
 * form. Everything works in place on buffers built once per fit.
 */
import type { CompiledModel, PopulationParameters } from '../stats/model.js';
import { choleskyLower, solveWithCholesky } from '../stats/dense.js';
import type { SaemSettings } from './settings.js';
import { annealingSchedule, type AnnealingSchedule } from './schedules.js';
import { refreshOmegaFactor, type OmegaFactor, type SimulationState } from './simulation.js';

/** The complete-data sufficient statistics of this iteration and their stochastic approximations. */
export interface SufficientStatistics {
  /** sum_i z_i phi_i', (1 + covariate terms) x nEta, row-major. */
  readonly designPhi: Float64Array;
  /** sum_i phi_i phi_i' over the BSV components, nEta x nEta. */
  readonly phiPhi: Float64Array;
  /** Sum of squared residuals (0 for the combined model, which has no such statistic). */
  residualSquares: number;
  readonly designPhiApprox: Float64Array;
  readonly phiPhiApprox: Float64Array;
  residualSquaresApprox: number;
}

/** What the M-step keeps between iterations: design, GLS layout, scratch and the statistics. */
export interface MStepState {
  readonly model: CompiledModel;
  readonly settings: SaemSettings;
  /** 1 + number of covariate terms (columns of a design row). */
  readonly designWidth: number;
  /** Design rows z_i = [1, x_i], subjects x designWidth. */
  readonly designRows: Float64Array;
  /** Z'Z, designWidth x designWidth. */
  readonly designCross: Float64Array;
  /** GLS coefficients of parameters with BSV: per random effect, intercept then its terms. */
  readonly coefEta: readonly number[];
  /** Design column of the coefficient (0 = intercept). */
  readonly coefDesignColumn: readonly number[];
  readonly coefFixed: readonly number[];
  /** Parameter index when the coefficient is an intercept, else -1. */
  readonly coefMu: readonly number[];
  /** Covariate term index, else -1. */
  readonly coefBeta: readonly number[];
  readonly freeCoefs: Int32Array;
  readonly glsMatrix: Float64Array;
  readonly glsCholesky: Float64Array;
  readonly glsRhs: Float64Array;
  readonly coefValue: Float64Array;
  /** Coefficient matrix B (designWidth x nEta) of the Omega update. */
  readonly coefMatrix: Float64Array;
  readonly omegaPrevious: Float64Array;
  readonly omegaCandidate: Float64Array;
  /** Omega block of each random effect. */
  readonly blockOf: Int32Array;
  /** Iterations where the new Omega was not positive definite (the previous one was kept). */
  omegaFailures: number;
  readonly statistics: SufficientStatistics;
}

export function createMStepState(model: CompiledModel, settings: SaemSettings): MStepState {
  const N = model.nSubjects;
  const nEta = model.nEta;
  const T = model.covariateTerms.length;
  const R = 1 + T;
  const subjects = model.subjects;
  const etaParam = model.etaParameter;
  const termParam = Int32Array.from(model.covariateTerms, (t) => t.parameterIndex);

  // Per-subject design rows z_i = [1, x_i] and Z'Z.
  const designCross = new Float64Array(R * R);
  const designRows = new Float64Array(N * R);
  for (let i = 0; i < N; i++) {
    designRows[i * R] = 1;
    for (let t = 0; t < T; t++) designRows[i * R + 1 + t] = subjects[i].design[t];
    for (let r = 0; r < R; r++) for (let c = 0; c < R; c++) designCross[r * R + c] += designRows[i * R + r] * designRows[i * R + c];
  }

  // GLS coefficient layout for parameters with BSV: per random effect, intercept then its terms.
  const coefEta: number[] = [];
  const coefDesignColumn: number[] = [];
  const coefFixed: number[] = [];
  const coefMu: number[] = [];
  const coefBeta: number[] = [];
  for (let k = 0; k < nEta; k++) {
    const j = etaParam[k];
    coefEta.push(k), coefDesignColumn.push(0), coefFixed.push(model.parameters[j].fixed ? 1 : 0), coefMu.push(j), coefBeta.push(-1);
    for (let t = 0; t < T; t++)
      if (termParam[t] === j) coefEta.push(k), coefDesignColumn.push(1 + t), coefFixed.push(model.covariateTerms[t].fixed ? 1 : 0), coefMu.push(-1), coefBeta.push(t);
  }
  const nCoef = coefEta.length;
  const freeCoefs = Int32Array.from([...Array(nCoef).keys()].filter((m) => !coefFixed[m]));
  const nFree = freeCoefs.length;
  const blockOf = new Int32Array(nEta);
  model.blocks.forEach((blk, bi) => blk.forEach((k) => (blockOf[k] = bi)));
  return {
    model,
    settings,
    designWidth: R,
    designRows,
    designCross,
    coefEta,
    coefDesignColumn,
    coefFixed,
    coefMu,
    coefBeta,
    freeCoefs,
    glsMatrix: new Float64Array(nFree * nFree),
    glsCholesky: new Float64Array(nFree * nFree),
    glsRhs: new Float64Array(nFree),
    coefValue: new Float64Array(nCoef),
    coefMatrix: new Float64Array(R * nEta),
    omegaPrevious: new Float64Array(nEta * nEta),
    omegaCandidate: new Float64Array(nEta * nEta),
    blockOf,
    omegaFailures: 0,
    statistics: {
      designPhi: new Float64Array(R * nEta),
      phiPhi: new Float64Array(nEta * nEta),
      residualSquares: 0,
      designPhiApprox: new Float64Array(R * nEta),
      phiPhiApprox: new Float64Array(nEta * nEta),
      residualSquaresApprox: 0,
    },
  };
}

/** Complete-data sufficient statistics at the current draws of `sim`, averaged over chains. */
export function computeStatistics(state: MStepState, sim: SimulationState): void {
  const { model, designRows } = state;
  const stats = state.statistics;
  const { designPhi, phiPhi } = stats;
  const N = model.nSubjects;
  const p = model.nParams;
  const nEta = model.nEta;
  const R = state.designWidth;
  const L = sim.chains;
  const etaParam = model.etaParameter;
  const residualModel = model.residualModel;
  const phiByChain = sim.phiByChain;
  designPhi.fill(0);
  phiPhi.fill(0);
  let residualSquares = 0;
  const invL = 1 / L;
  for (let i = 0; i < N; i++) {
    const sub = model.subjects[i];
    for (let c = 0; c < L; c++) {
      const s = i * L + c;
      const base = s * p;
      for (let k = 0; k < nEta; k++) {
        const v = phiByChain[base + etaParam[k]];
        for (let r = 0; r < R; r++) designPhi[r * nEta + k] += designRows[i * R + r] * v * invL;
        for (let k2 = 0; k2 <= k; k2++) phiPhi[k * nEta + k2] += v * phiByChain[base + etaParam[k2]] * invL;
      }
      const f = sim.predictionsByChain[s];
      const y = sim.levelsByChain[s];
      for (let o = 0; o < sub.nObs; o++) {
        let e: number;
        if (residualModel === 'additive') e = y[o] - f[o];
        else if (residualModel === 'proportional') e = (y[o] - f[o]) / f[o];
        else if (residualModel === 'log-additive') e = Math.log(y[o]) - Math.log(f[o]);
        else e = 0;
        residualSquares += e * e * invL;
      }
    }
  }
  for (let k = 0; k < nEta; k++) for (let k2 = 0; k2 < k; k2++) phiPhi[k2 * nEta + k] = phiPhi[k * nEta + k2];
  stats.residualSquares = Number.isFinite(residualSquares) ? residualSquares : stats.residualSquaresApprox;
}

/** s_k = s_{k-1} + gamma (S_k - s_{k-1}) for every statistic. */
export function approximateStatistics(state: MStepState, gamma: number): void {
  const stats = state.statistics;
  const nEta = state.model.nEta;
  const R = state.designWidth;
  for (let q = 0; q < R * nEta; q++) stats.designPhiApprox[q] += gamma * (stats.designPhi[q] - stats.designPhiApprox[q]);
  for (let q = 0; q < nEta * nEta; q++) stats.phiPhiApprox[q] += gamma * (stats.phiPhi[q] - stats.phiPhiApprox[q]);
  stats.residualSquaresApprox += gamma * (stats.residualSquares - stats.residualSquaresApprox);
}

/**
 * The closed-form part of the M-step from the current approximations: updates theta (mu, beta
 * of parameters with BSV, Omega, and a or b outside the combined model) and `omegaFactor`.
 * With `annealing` (the annealing schedule, null when this iteration does not anneal), variances
 * keep its floors (engine/saem/schedules.ts).
 */
export function closedFormMStep(state: MStepState, theta: PopulationParameters, omegaFactor: OmegaFactor, annealing: AnnealingSchedule | null): void {
  const { model, settings, designCross, coefEta, coefDesignColumn, coefFixed, coefMu, coefBeta, freeCoefs, glsMatrix, glsRhs, coefValue, coefMatrix, omegaPrevious, omegaCandidate, blockOf } = state;
  const { designPhiApprox, phiPhiApprox } = state.statistics;
  const N = model.nSubjects;
  const nEta = model.nEta;
  const R = state.designWidth;
  const nCoef = coefEta.length;
  const nFree = freeCoefs.length;
  const omegaInverse = omegaFactor.inverse;
  const residualModel = model.residualModel;
  if (nEta > 0) {
    // GLS for the coefficients of parameters with BSV, weights W = Omega_{k-1}^-1.
    for (let m = 0; m < nCoef; m++) coefValue[m] = coefMu[m] >= 0 ? theta.mu[coefMu[m]] : theta.beta[coefBeta[m]];
    if (nFree > 0) {
      for (let fi = 0; fi < nFree; fi++) {
        const m = freeCoefs[fi];
        let rhs = 0;
        for (let k2 = 0; k2 < nEta; k2++) rhs += omegaInverse[coefEta[m] * nEta + k2] * designPhiApprox[coefDesignColumn[m] * nEta + k2];
        for (let m2 = 0; m2 < nCoef; m2++) {
          if (!coefFixed[m2]) continue;
          rhs -= omegaInverse[coefEta[m] * nEta + coefEta[m2]] * designCross[coefDesignColumn[m] * R + coefDesignColumn[m2]] * coefValue[m2];
        }
        glsRhs[fi] = rhs;
        for (let fj = 0; fj < nFree; fj++) {
          const m2 = freeCoefs[fj];
          glsMatrix[fi * nFree + fj] = omegaInverse[coefEta[m] * nEta + coefEta[m2]] * designCross[coefDesignColumn[m] * R + coefDesignColumn[m2]];
        }
      }
      if (choleskyLower(glsMatrix, nFree, state.glsCholesky)) {
        solveWithCholesky(state.glsCholesky, nFree, glsRhs);
        for (let fi = 0; fi < nFree; fi++) {
          const m = freeCoefs[fi];
          if (Number.isFinite(glsRhs[fi])) coefValue[m] = glsRhs[fi];
        }
      }
      for (let m = 0; m < nCoef; m++) {
        if (coefMu[m] >= 0) theta.mu[coefMu[m]] = coefValue[m];
        else theta.beta[coefBeta[m]] = coefValue[m];
      }
    }
    // Omega = (S_pp - B'S_zp - S_zp'B + B'Z'Z B) / N within the blocks.
    coefMatrix.fill(0);
    for (let m = 0; m < nCoef; m++) coefMatrix[coefDesignColumn[m] * nEta + coefEta[m]] = coefValue[m];
    omegaPrevious.set(theta.omega);
    for (let k = 0; k < nEta; k++)
      for (let k2 = 0; k2 <= k; k2++) {
        let v = 0;
        if (blockOf[k] === blockOf[k2]) {
          v = phiPhiApprox[k * nEta + k2];
          for (let r = 0; r < R; r++) {
            v -= coefMatrix[r * nEta + k] * designPhiApprox[r * nEta + k2] + designPhiApprox[r * nEta + k] * coefMatrix[r * nEta + k2];
            let bz = 0;
            for (let r2 = 0; r2 < R; r2++) bz += designCross[r * R + r2] * coefMatrix[r2 * nEta + k2];
            v += coefMatrix[r * nEta + k] * bz;
          }
          v /= N;
        }
        omegaCandidate[k * nEta + k2] = omegaCandidate[k2 * nEta + k] = v;
      }
    if (annealing)
      for (let k = 0; k < nEta; k++) {
        const floor = annealingSchedule.varianceFloor(annealing, omegaPrevious[k * nEta + k]);
        if (!(omegaCandidate[k * nEta + k] >= floor)) {
          // Raising a variance alone keeps the block positive definite; rescale its covariances too.
          const ratio = Math.sqrt(floor / Math.max(omegaCandidate[k * nEta + k], 1e-300));
          omegaCandidate[k * nEta + k] = floor;
          for (let k2 = 0; k2 < nEta; k2++) if (k2 !== k && Number.isFinite(ratio)) {
            omegaCandidate[k * nEta + k2] *= ratio;
            omegaCandidate[k2 * nEta + k] *= ratio;
          }
        }
      }
    for (let k = 0; k < nEta; k++) if (!(omegaCandidate[k * nEta + k] > 1e-12)) omegaCandidate[k * nEta + k] = 1e-12;
    theta.omega.set(omegaCandidate);
    if (!refreshOmegaFactor(omegaFactor, theta.omega)) {
      state.omegaFailures++;
      theta.omega.set(omegaPrevious);
      refreshOmegaFactor(omegaFactor, theta.omega);
    }
  }

  // Residual error, closed form where the model allows.
  if (residualModel !== 'combined' && model.nObsTotal > 0) {
    let v = state.statistics.residualSquaresApprox / model.nObsTotal;
    if (residualModel === 'proportional') {
      if (annealing) v = Math.max(v, annealingSchedule.sdVarianceFloor(annealing, theta.b));
      if (v > 0 && Number.isFinite(v)) theta.b = Math.sqrt(v);
    } else {
      if (annealing) v = Math.max(v, annealingSchedule.sdVarianceFloor(annealing, theta.a));
      if (v > 0 && Number.isFinite(v)) theta.a = Math.sqrt(v);
    }
  }
}
