/**
 * The settle window of SAEM's search phase (engine/saem/saem.ts): the statistics and the
 * numerical-block values of the last W search iterations, kept in a ring. When search ends, the
 * averaging phase opens from their means (with gamma_k = 1/(k - K1 + W), the average then runs
 * over every draw from iteration K1 - W + 1 on); starting from one noisy iterate instead costs a
 * great deal when much information is missing (EM contracts slowly).
 */
import type { PopulationParameters } from '../stats/model.js';
import { readNumerical, writeNumerical, type NumericalComponent } from './layout.js';
import type { SufficientStatistics } from './mStep.js';

export interface SettleWindowStore {
  /** W: iterations kept. */
  readonly window: number;
  readonly designPhiSize: number;
  readonly phiPhiSize: number;
  readonly nNewton: number;
  /** Per slot: S_zphi, S_phiphi, sum of squared residuals, numerical-block values. */
  readonly designPhi: Float64Array;
  readonly phiPhi: Float64Array;
  readonly residualSquares: Float64Array;
  readonly newtonX: Float64Array;
}

export function createSettleWindowStore(windowIterations: number, designWidth: number, nEta: number, nNewton: number): SettleWindowStore {
  return {
    window: windowIterations,
    designPhiSize: designWidth * nEta,
    phiPhiSize: nEta * nEta,
    nNewton,
    designPhi: new Float64Array(windowIterations * designWidth * nEta),
    phiPhi: new Float64Array(windowIterations * nEta * nEta),
    residualSquares: new Float64Array(windowIterations),
    newtonX: new Float64Array(windowIterations * nNewton),
  };
}

/** Keep this (1-based) search iteration's statistics. */
export function storeWindowStatistics(store: SettleWindowStore, stats: SufficientStatistics, iteration: number): void {
  const slot = (iteration - 1) % store.window;
  store.designPhi.set(stats.designPhi, slot * store.designPhiSize);
  store.phiPhi.set(stats.phiPhi, slot * store.phiPhiSize);
  store.residualSquares[slot] = stats.residualSquares;
}

/** Keep this (1-based) search iteration's numerical-block values (after its M-step). */
export function storeWindowNewton(store: SettleWindowStore, components: readonly NumericalComponent[], theta: PopulationParameters, iteration: number): void {
  readNumerical(components, theta, store.newtonX, ((iteration - 1) % store.window) * store.nNewton);
}

/**
 * Set the statistics (this iteration's and their approximations) to their means over the last
 * min(W, iteration) search iterations and the numerical block of theta to its mean there;
 * returns how many iterations that mean covers.
 */
export function openFromWindowMeans(store: SettleWindowStore, stats: SufficientStatistics, components: readonly NumericalComponent[], theta: PopulationParameters, iteration: number): number {
  const n = Math.min(store.window, iteration);
  const { designPhiSize, phiPhiSize, nNewton } = store;
  stats.designPhiApprox.fill(0);
  stats.phiPhiApprox.fill(0);
  stats.residualSquaresApprox = 0;
  for (let slot = 0; slot < n; slot++) {
    for (let q = 0; q < designPhiSize; q++) stats.designPhiApprox[q] += store.designPhi[slot * designPhiSize + q] / n;
    for (let q = 0; q < phiPhiSize; q++) stats.phiPhiApprox[q] += store.phiPhi[slot * phiPhiSize + q] / n;
    stats.residualSquaresApprox += store.residualSquares[slot] / n;
  }
  for (let m = 0; m < nNewton; m++) {
    let v = 0;
    for (let slot = 0; slot < n; slot++) v += store.newtonX[slot * nNewton + m] / n;
    writeNumerical(components[m], v, theta);
  }
  stats.residualSquares = stats.residualSquaresApprox;
  stats.designPhi.set(stats.designPhiApprox);
  stats.phiPhi.set(stats.phiPhiApprox);
  return n;
}
