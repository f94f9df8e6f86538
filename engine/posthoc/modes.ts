/**
 * Conditional modes (MAP / empirical Bayes estimates) of each subject's random effects at the
 * population estimate: argmax_eta log p(y_i | eta) + log N(eta; 0, Omega), by BFGS from the
 * better of two starts (the estimator's conditional mean and eta = 0), and the Laplace
 * covariance (minus the inverse Hessian of the log joint density at the mode), which the
 * conditional sampler uses as its proposal scale. The optimiser is the dose-individualisation
 * engine's BFGS (engine/optim/bfgs.ts), the same MAP search a dosing session uses.
 */
import { choleskyInverse, cholesky } from '../linalg/index.js';
import type { CompiledModel } from '../stats/model.js';
import type { SubjectDensity } from './density.js';
import { minimiseBfgs } from '../optim/bfgs.js';
import { centralHessian } from '../optim/finiteDifferences.js';

export interface ModeResult {
  nEta: number;
  /** N x nEta. */
  eta: Float64Array;
  /** N x nParams, transformed scale. */
  phi: Float64Array;
  /** N x nParams, natural scale. */
  natural: Float64Array;
  /** N x nEta x nEta: Laplace covariance at the mode (the prior Omega where the Hessian failed). */
  laplaceCovariance: Float64Array;
  /** 1 where the Hessian at the mode was negative definite. */
  laplaceOk: Uint8Array;
  /** 1 where the optimiser converged. */
  converged: Uint8Array;
  /** log p(y_i, eta_mode). */
  logJoint: Float64Array;
  /** Laplace approximation of log p(y_i). */
  logMarginalLaplace: Float64Array;
  warnings: string[];
}

export interface ModeOptions {
  /** Starting random effects, N x nEta (e.g. the estimator's conditional means); zeros otherwise. */
  start?: Float64Array;
}

const LOG_2PI = Math.log(2 * Math.PI);

export function conditionalModes(density: SubjectDensity, options: ModeOptions = {}): ModeResult {
  const out = allocateModes(density.model, false);
  modeKernel(density, out, options.start).run(0, density.model.nSubjects);
  concludeModes(density.model, out);
  return out;
}

/** Per-subject outputs of the modes (in SharedArrayBuffers when `shared`, for engine/posthoc/threads.ts). */
export function allocateModes(model: CompiledModel, shared: boolean): ModeResult {
  const N = model.nSubjects;
  const d = model.nEta;
  const p = model.nParams;
  return {
    nEta: d,
    eta: f64(N * d, shared),
    phi: f64(N * p, shared),
    natural: f64(N * p, shared),
    laplaceCovariance: f64(N * d * d, shared),
    laplaceOk: u8(N, shared),
    converged: u8(N, shared),
    logJoint: f64(N, shared),
    logMarginalLaplace: f64(N, shared),
    warnings: [],
  };
}

/** The modes of subjects [from, to) into `out` (each subject's entries only; no state across subjects). */
export function modeKernel(density: SubjectDensity, out: ModeResult, start: Float64Array | undefined): { run(from: number, to: number): void } {
  const model = density.model;
  const d = density.nEta;
  const p = model.nParams;
  let maxObs = 0;
  for (const s of model.subjects) maxObs = Math.max(maxObs, s.nObs);
  const f = new Float64Array(maxObs);
  const x = new Float64Array(d);
  const best = new Float64Array(d);
  const hess = new Float64Array(d * d);
  const chol = new Float64Array(d * d);
  const cov = new Float64Array(d * d);
  const phiRow = new Float64Array(p);
  const natRow = new Float64Array(p);
  return {
    run(from, to) {
      for (let i = from; i < to; i++) {
        const fi = f.subarray(0, model.subjects[i].nObs);
        const objective = (e: Float64Array) => -density.logJoint(i, e, fi);
        let bestF = Infinity;
        let conv = false;
        for (let s0 = 0; s0 < 2; s0++) {
          if (s0 === 0) {
            if (!start) continue;
            for (let k = 0; k < d; k++) x[k] = start[i * d + k];
          } else x.fill(0);
          const r = d > 0 ? minimiseBfgs(objective, x) : { x, fx: objective(x), converged: true };
          if (r.fx < bestF) {
            bestF = r.fx;
            best.set(r.x);
            conv = r.converged;
          }
        }
        out.eta.set(best, i * d);
        out.converged[i] = conv ? 1 : 0;
        out.logJoint[i] = -bestF;
        density.phiOf(i, best, phiRow);
        out.phi.set(phiRow, i * p);
        model.toNatural(phiRow, natRow);
        out.natural.set(natRow, i * p);
        // Laplace covariance: inverse of the Hessian of -log p(y, eta) at the mode.
        let ok = false;
        if (d > 0 && Number.isFinite(bestF)) {
          x.set(best);
          centralHessian(objective, x, hess, 1e-4);
          for (let q = 0; q < d * d; q++) hess[q] = 0.5 * (hess[q] + hess[(q % d) * d + ((q / d) | 0)]);
          if (cholesky(hess, d, chol)) {
            choleskyInverse(chol, d, cov);
            ok = true;
            let logDetH = 0;
            for (let k = 0; k < d; k++) logDetH += 2 * Math.log(chol[k * d + k]);
            out.logMarginalLaplace[i] = -bestF + 0.5 * d * LOG_2PI - 0.5 * logDetH;
          }
        } else if (d === 0) {
          ok = true;
          out.logMarginalLaplace[i] = -bestF;
        }
        if (!ok) {
          cov.set(density.theta.omega);
          out.logMarginalLaplace[i] = NaN;
        }
        out.laplaceOk[i] = ok ? 1 : 0;
        out.laplaceCovariance.set(d > 0 ? cov : [], i * d * d);
      }
    },
  };
}

/** The warnings of the modes, from the per-subject flags in subject order. */
export function concludeModes(model: CompiledModel, out: ModeResult): void {
  const unsettled: string[] = [];
  const flat: string[] = [];
  for (let i = 0; i < model.nSubjects; i++) {
    if (!out.converged[i]) unsettled.push(model.subjects[i].id);
    if (!out.laplaceOk[i]) flat.push(model.subjects[i].id);
  }
  if (unsettled.length)
    out.warnings.push(`conditional mode: the optimiser did not converge for subject(s) ${list(unsettled)}; their modes (and IPRED, IWRES) are the best point found`);
  if (flat.length)
    out.warnings.push(`conditional mode: the log density is not concave at the mode of subject(s) ${list(flat)}; their sampler uses Omega as its proposal scale and the linearisation skips them`);
}

/** A Float64Array of n entries, over a SharedArrayBuffer when `shared`. */
export const f64 = (n: number, shared: boolean): Float64Array => (shared ? new Float64Array(new SharedArrayBuffer(8 * n)) : new Float64Array(n));
export const u8 = (n: number, shared: boolean): Uint8Array => (shared ? new Uint8Array(new SharedArrayBuffer(n)) : new Uint8Array(n));
export const i32 = (n: number, shared: boolean): Int32Array => (shared ? new Int32Array(new SharedArrayBuffer(4 * n)) : new Int32Array(n));

export function list(ids: readonly string[]): string {
  return ids.length <= 10 ? ids.join(', ') : `${ids.slice(0, 10).join(', ')} and ${ids.length - 10} more`;
}
