/**
 * The model linearised around each subject's conditional mode (first-order conditional
 * linearisation, Lindstrom & Bates 1990, from memory): with phi_hat the mode and J_i the
 * Jacobian of the predictions in phi at phi_hat,
 *   y_i ~ N(m_i, V_i),  m_i = f(phi_hat) + J_i (meanPhi_i(theta) - phi_hat),  V_i = J_i Omega J_i' + R_i,
 * R_i = diag(g(f(phi_hat); a, b)^2). Log-additive error is linearised on the log scale (the
 * -log y Jacobian is added so -2LL stays on the scale of y). Levels below the LLOQ have no
 * Gaussian form here and are left out (counted in `censoredLeftOut`).
 */
import { cholesky } from '../linalg/index.js';
import type { CompiledModel, PopulationParameters } from '../stats/model.js';
import { residualSd } from '../stats/residual.js';
import type { ModeResult } from './modes.js';

const LOG_2PI = Math.log(2 * Math.PI);

export interface Linearisation {
  model: CompiledModel;
  /** Per subject: indices of the uncensored levels used. */
  used: Int32Array[];
  /** Per subject: f(phi_hat) at the used levels (log f for log-additive). */
  fHat: Float64Array[];
  /** Per subject: Jacobian rows of the used levels, nUsed x nParams (of log f for log-additive). */
  jacobian: Float64Array[];
  /** Per subject: phi_hat. */
  phiHat: Float64Array[];
  /** Per subject: subjects whose predictions at the mode failed are skipped. */
  ok: Uint8Array;
  censoredLeftOut: number;
  /** Sum of -log y over the used levels (log-additive only, else 0), per subject. */
  logJacobian: Float64Array;
}

export function buildLinearisation(model: CompiledModel, modes: ModeResult): Linearisation {
  const N = model.nSubjects;
  const p = model.nParams;
  const logScale = model.residualModel === 'log-additive';
  const lin: Linearisation = { model, used: [], fHat: [], jacobian: [], phiHat: [], ok: new Uint8Array(N), censoredLeftOut: 0, logJacobian: new Float64Array(N) };
  let maxObs = 0;
  for (const s of model.subjects) maxObs = Math.max(maxObs, s.nObs);
  const f0 = new Float64Array(maxObs);
  const fp = new Float64Array(maxObs);
  const fm = new Float64Array(maxObs);
  for (let i = 0; i < N; i++) {
    const s = model.subjects[i];
    const used: number[] = [];
    for (let o = 0; o < s.nObs; o++) if (!s.censored[o]) used.push(o);
    lin.censoredLeftOut += s.nCensored;
    const phi = Float64Array.from(modes.phi.subarray(i * p, (i + 1) * p));
    const nu = used.length;
    const fHat = new Float64Array(nu);
    const jac = new Float64Array(nu * p);
    let ok = model.predict(i, phi, f0.subarray(0, s.nObs));
    for (let j = 0; j < p && ok; j++) {
      const h = 1e-5 * (1 + Math.abs(phi[j]));
      const x = phi[j];
      phi[j] = x + h;
      ok = model.predict(i, phi, fp.subarray(0, s.nObs));
      phi[j] = x - h;
      ok = ok && model.predict(i, phi, fm.subarray(0, s.nObs));
      phi[j] = x;
      for (let u = 0; u < nu; u++) {
        const o = used[u];
        jac[u * p + j] = logScale ? (Math.log(fp[o]) - Math.log(fm[o])) / (2 * h) : (fp[o] - fm[o]) / (2 * h);
      }
    }
    let lj = 0;
    for (let u = 0; u < nu; u++) {
      const o = used[u];
      fHat[u] = logScale ? Math.log(f0[o]) : f0[o];
      if (logScale) lj -= Math.log(s.y[o]);
    }
    for (let q = 0; q < jac.length; q++) if (!Number.isFinite(jac[q])) ok = false;
    for (let u = 0; u < nu; u++) if (!Number.isFinite(fHat[u])) ok = false;
    lin.ok[i] = ok ? 1 : 0;
    lin.used.push(Int32Array.from(used));
    lin.fHat.push(fHat);
    lin.jacobian.push(jac);
    lin.phiHat.push(phi);
    lin.logJacobian[i] = lj;
  }
  return lin;
}

/** Scratch for linearisedMinus2LL (sized for the largest subject). */
export interface LinearisedScratch {
  v: Float64Array;
  l: Float64Array;
  r: Float64Array;
  jo: Float64Array;
  m: Float64Array;
}

export function linearisedScratch(lin: Linearisation): LinearisedScratch {
  let n = 0;
  for (const u of lin.used) n = Math.max(n, u.length);
  const p = lin.model.nParams;
  return { v: new Float64Array(n * n), l: new Float64Array(n * n), r: new Float64Array(n), jo: new Float64Array(n * p), m: new Float64Array(p) };
}

/** -2 log-likelihood of the linearised model at theta (subjects with ok = 0 skipped); NaN when some V_i is not positive definite. */
export function linearisedMinus2LL(lin: Linearisation, theta: PopulationParameters, scratch: LinearisedScratch = linearisedScratch(lin)): number {
  const model = lin.model;
  const p = model.nParams;
  const d = model.nEta;
  const etaParam = model.etaParameter;
  const logScale = model.residualModel === 'log-additive';
  let total = 0;
  for (let i = 0; i < model.nSubjects; i++) {
    if (!lin.ok[i]) continue;
    const s = model.subjects[i];
    const used = lin.used[i];
    const n = used.length;
    if (n === 0) continue;
    const J = lin.jacobian[i];
    const fHat = lin.fHat[i];
    const phiHat = lin.phiHat[i];
    model.meanPhi(i, theta, scratch.m);
    const { v, l, r, jo } = scratch;
    // J Omega (n x d, over the BSV columns).
    for (let u = 0; u < n; u++)
      for (let k = 0; k < d; k++) {
        let acc = 0;
        for (let k2 = 0; k2 < d; k2++) acc += J[u * p + etaParam[k2]] * theta.omega[k2 * d + k];
        jo[u * d + k] = acc;
      }
    for (let u = 0; u < n; u++) {
      let mean = fHat[u];
      for (let j = 0; j < p; j++) mean += J[u * p + j] * (scratch.m[j] - phiHat[j]);
      r[u] = logScale ? Math.log(s.y[used[u]]) - mean : s.y[used[u]] - mean;
      for (let w = 0; w <= u; w++) {
        let acc = 0;
        for (let k = 0; k < d; k++) acc += jo[u * d + k] * J[w * p + etaParam[k]];
        v[u * n + w] = v[w * n + u] = acc;
      }
      const g = logScale ? theta.a : residualSd(model.residualModel, theta.a, theta.b, fHat[u]);
      v[u * n + u] += g * g;
    }
    if (!cholesky(v, n, l)) return NaN;
    let logDet = 0;
    let q = 0;
    for (let u = 0; u < n; u++) {
      let acc = r[u];
      for (let k = 0; k < u; k++) acc -= l[u * n + k] * r[k];
      r[u] = acc / l[u * n + u];
      q += r[u] * r[u];
      logDet += 2 * Math.log(l[u * n + u]);
    }
    total += n * LOG_2PI + logDet + q - 2 * lin.logJacobian[i];
  }
  return total;
}
