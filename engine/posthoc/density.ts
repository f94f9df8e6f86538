/**
 * The per-subject joint density at fixed population parameters, on the random effects eta
 * (the BSV components of phi_i minus their population mean):
 *   log p(y_i, eta) = log p(y_i | phi_i) + log N(eta; 0, Omega),  phi_i = meanPhi_i + eta.
 * Components without BSV stay at meanPhi_i. Every post-fit step (modes, conditional draws,
 * importance sampling, linearisation) evaluates subjects through this one object.
 */
import type { CompiledModel, OmegaFactor, PopulationParameters } from '../stats/model.js';

const LOG_2PI = Math.log(2 * Math.PI);

export interface SubjectDensity {
  readonly model: CompiledModel;
  readonly theta: PopulationParameters;
  readonly nEta: number;
  readonly factor: OmegaFactor;
  /** meanPhi_i for every subject, N x nParams. */
  readonly meanPhi: Float64Array;
  /** phi_i for eta into out (length nParams). */
  phiOf(i: number, eta: ArrayLike<number>, out: Float64Array): void;
  /** log N(eta; 0, Omega), constants included. */
  logPrior(eta: ArrayLike<number>): number;
  /** log p(y_i | eta) with the predictions left in f (length nObs_i); -Infinity when impossible. */
  logLik(i: number, eta: ArrayLike<number>, f: Float64Array): number;
  /** logLik + logPrior. */
  logJoint(i: number, eta: ArrayLike<number>, f: Float64Array): number;
}

/** null when Omega is not positive definite. */
export function buildDensity(model: CompiledModel, theta: PopulationParameters): SubjectDensity | null {
  const factor = model.priorFactor(theta.omega);
  if (!factor) return null;
  const p = model.nParams;
  const nEta = model.nEta;
  const meanPhi = new Float64Array(model.nSubjects * p);
  const row = new Float64Array(p);
  for (let i = 0; i < model.nSubjects; i++) {
    model.meanPhi(i, theta, row);
    meanPhi.set(row, i * p);
  }
  const phi = new Float64Array(p);
  const etaParam = model.etaParameter;
  const inv = factor.inverse;
  const constant = -0.5 * (factor.logDet + nEta * LOG_2PI);
  function phiOf(i: number, eta: ArrayLike<number>, out: Float64Array): void {
    for (let j = 0; j < p; j++) out[j] = meanPhi[i * p + j];
    for (let k = 0; k < nEta; k++) out[etaParam[k]] += eta[k];
  }
  function logPrior(eta: ArrayLike<number>): number {
    let q = 0;
    for (let r = 0; r < nEta; r++) {
      let s = 0;
      for (let c = 0; c < nEta; c++) s += inv[r * nEta + c] * eta[c];
      q += eta[r] * s;
    }
    return constant - 0.5 * q;
  }
  function logLik(i: number, eta: ArrayLike<number>, f: Float64Array): number {
    phiOf(i, eta, phi);
    if (!model.predict(i, phi, f)) return -Infinity;
    return model.logLikFromPredictions(i, f, theta.a, theta.b);
  }
  return {
    model,
    theta,
    nEta,
    factor,
    meanPhi,
    phiOf,
    logPrior,
    logLik,
    logJoint(i, eta, f) {
      const ll = logLik(i, eta, f);
      return ll === -Infinity ? ll : ll + logPrior(eta);
    },
  };
}
