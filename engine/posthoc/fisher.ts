/**
 * Observed Fisher information of the population parameters (working scale, see parameters.ts)
 * and what follows from it: covariance, SEs on the natural scale by the delta method, RSE %,
 * the correlation matrix and the condition number.
 * - Stochastic approximation by Louis' formula (Louis 1982, JRSS B 44:226-233; Kuhn & Lavielle
 *   2005; from memory): I = -sum_i (E[d2 log p(y_i, phi_i)] + Var[d log p(y_i, phi_i)]), the
 *   expectations over p(phi_i | y_i; theta_hat), estimated by averages over the kept conditional
 *   draws. The complete-data log-likelihood splits into the population density of phi_i
 *   (derivatives analytic in the typical values and covariate effects, finite differences of
 *   Omega^-1 and log det Omega in the variance terms, formed once) and log p(y_i | phi_i)
 *   (finite differences in the residual terms and the typical values without BSV).
 * - Linearisation: the central-difference Hessian of the linearised -2LL (linearised.ts), halved.
 */
import { cholesky, choleskyInverse, symmetricEigen } from '../linalg/index.js';
import type { CompiledModel, PopulationParameters } from '../stats/model.js';
import type { ConditionalResult } from './conditional.js';
import type { SubjectDensity } from './density.js';
import { linearisedMinus2LL, linearisedScratch, type Linearisation } from './linearised.js';
import { centralGradient, centralHessian } from '../optim/finiteDifferences.js';
import { f64, u8 } from './modes.js';
import { copyTheta, fromWorking, naturalOf, toWorking, type ParameterLayout } from './parameters.js';

export type InformationMethod = 'stochastic approximation (Louis)' | 'linearisation';

/** Information over the estimated entries (layout.estimated order), P x P. */
export interface Information {
  method: InformationMethod;
  matrix: Float64Array;
  size: number;
  warnings: string[];
}

const FD = 1e-4;

export function louisInformation(density: SubjectDensity, layout: ParameterLayout, conditional: ConditionalResult): Information {
  const parts = allocateLouis(density.model, layout, false);
  const kernel = louisKernel(density, layout, conditional, parts);
  kernel.run(0, density.model.nSubjects);
  return concludeLouis(density.model, layout, parts, kernel.omegaOk);
}

/** Per-subject parts of Louis' information: each subject's P x P term and whether it had a usable draw. */
export interface LouisParts {
  contribution: Float64Array;
  used: Uint8Array;
}

export function allocateLouis(model: CompiledModel, layout: ParameterLayout, shared: boolean): LouisParts {
  const P = layout.estimated.length;
  return { contribution: f64(model.nSubjects * P * P, shared), used: u8(model.nSubjects, shared) };
}

/**
 * Louis' terms of subjects [from, to) into `parts` (each subject's entries only): the Omega
 * derivatives are formed once here, identically on every thread.
 */
export function louisKernel(density: SubjectDensity, layout: ParameterLayout, conditional: ConditionalResult, parts: LouisParts): { run(from: number, to: number): void; omegaOk: boolean } {
  const model = density.model;
  const theta = density.theta;
  const d = density.nEta;
  const p = model.nParams;
  const est = layout.estimated;
  const P = est.length;
  const w0 = toWorking(model, layout, theta);
  const etaParam = model.etaParameter;

  // Entries of each part: mean (typical / covariate of BSV parameters), Omega, data.
  const meanPos: number[] = []; // position in est
  const omegaPos: number[] = [];
  const dataPos: number[] = [];
  est.forEach((q, a) => {
    const e = layout.entries[q];
    if (e.kind === 'bsv' || e.kind === 'correlation') omegaPos.push(a);
    else if (e.kind === 'residual') dataPos.push(a);
    else {
      const j = e.kind === 'typical' ? e.index : model.covariateTerms[e.index].parameterIndex;
      (model.parameters[j].etaIndex >= 0 ? meanPos : dataPos).push(a);
    }
  });
  const nO = omegaPos.length;
  const nD = dataPos.length;
  const structuralData = dataPos.some((a) => layout.entries[est[a]].kind !== 'residual');

  // Omega^-1 and -0.5 log det Omega with their derivatives in the Omega entries (finite differences, once).
  const thetaTmp = copyTheta(theta);
  const wTmp = Float64Array.from(w0);
  const invAt = (out: Float64Array): number => {
    fromWorking(model, layout, wTmp, thetaTmp);
    const l = new Float64Array(d * d);
    if (!cholesky(thetaTmp.omega, d, l)) return NaN;
    choleskyInverse(l, d, out);
    let ld = 0;
    for (let k = 0; k < d; k++) ld += 2 * Math.log(l[k * d + k]);
    return -0.5 * ld;
  };
  const A = new Float64Array(d * d);
  const c0 = invAt(A);
  const Aa = new Float64Array(nO * d * d);
  const ca = new Float64Array(nO);
  const Aab = new Float64Array(nO * nO * d * d);
  const cab = new Float64Array(nO * nO);
  const tp = new Float64Array(d * d), tm = new Float64Array(d * d), tpp = new Float64Array(d * d), tpm = new Float64Array(d * d), tmp = new Float64Array(d * d), tmm = new Float64Array(d * d);
  for (let x = 0; x < nO; x++) {
    const qx = est[omegaPos[x]];
    wTmp[qx] = w0[qx] + FD;
    const cp = invAt(tp);
    wTmp[qx] = w0[qx] - FD;
    const cm = invAt(tm);
    wTmp[qx] = w0[qx];
    ca[x] = (cp - cm) / (2 * FD);
    cab[x * nO + x] = (cp - 2 * c0 + cm) / (FD * FD);
    for (let q = 0; q < d * d; q++) {
      Aa[x * d * d + q] = (tp[q] - tm[q]) / (2 * FD);
      Aab[(x * nO + x) * d * d + q] = (tp[q] - 2 * A[q] + tm[q]) / (FD * FD);
    }
    for (let y = 0; y < x; y++) {
      const qy = est[omegaPos[y]];
      const corner = (sx: number, sy: number, out: Float64Array) => {
        wTmp[qx] = w0[qx] + sx * FD;
        wTmp[qy] = w0[qy] + sy * FD;
        const v = invAt(out);
        wTmp[qx] = w0[qx];
        wTmp[qy] = w0[qy];
        return v;
      };
      const v = (corner(1, 1, tpp) - corner(1, -1, tpm) - corner(-1, 1, tmp) + corner(-1, -1, tmm)) / (4 * FD * FD);
      cab[x * nO + y] = cab[y * nO + x] = v;
      for (let q = 0; q < d * d; q++) Aab[(x * nO + y) * d * d + q] = Aab[(y * nO + x) * d * d + q] = (tpp[q] - tpm[q] - tmp[q] + tmm[q]) / (4 * FD * FD);
    }
  }

  const g = new Float64Array(P);
  const H = new Float64Array(P * P);
  const sumG = new Float64Array(P);
  const sumGG = new Float64Array(P * P);
  const e = new Float64Array(d);
  const Ae = new Float64Array(d);
  const Aae = new Float64Array(nO * d);
  const dm = new Float64Array(meanPos.length * d); // d m_k / d mean-entry
  const phi = new Float64Array(p);
  const phiD = new Float64Array(p);
  let maxObs = 0;
  for (const s of model.subjects) maxObs = Math.max(maxObs, s.nObs);
  const fBuf = new Float64Array(maxObs);
  const xD = new Float64Array(nD);
  const gD = new Float64Array(nD);
  const hD = new Float64Array(nD * nD);
  const meanRow = new Float64Array(p);
  const analyticResidual = !structuralData;
  // The predictions depend only on the structural entries of the data part; the finite-difference
  // stencils of one draw visit few structural points (3 for one structural entry, against 25
  // evaluations), so each draw keeps its predictions per structural point (the same numbers).
  const structuralSlots = Int32Array.from(dataPos.flatMap((a, r) => (layout.entries[est[a]].kind !== 'residual' ? [r] : [])));
  const nS = structuralSlots.length;
  const cacheCapacity = 1 + 2 * nS + 2 * nS * (nS - 1);
  const cacheKeys = new Float64Array(cacheCapacity * nS);
  const cachePredictions = new Float64Array(cacheCapacity * maxObs);
  const cacheValid = new Uint8Array(cacheCapacity);
  let cacheUsed = 0;
  let cacheNext = 0;
  const residualWhich = Int32Array.from(dataPos, (a) => layout.entries[est[a]].index);

  const contribution = parts.contribution;
  const usedFlag = parts.used;
  return {
    omegaOk: Number.isFinite(c0),
    run(from, to) {
      for (let i = from; i < to; i++) {
        const n = conditional.nKept[i];
        const sub = model.subjects[i];
        const f = fBuf.subarray(0, sub.nObs);
        dm.fill(0);
        meanPos.forEach((a, r) => {
          const en = layout.entries[est[a]];
          if (en.kind === 'typical') dm[r * d + model.parameters[en.index].etaIndex] = 1;
          else {
            const t = en.index;
            dm[r * d + model.parameters[model.covariateTerms[t].parameterIndex].etaIndex] = sub.design[t];
          }
        });
        // Data part as a function of its working entries (phi of the draw held fixed on the BSV components).
        const dataLL = (x: Float64Array): number => {
          let a = theta.a, b = theta.b;
          if (structuralData) {
            for (let r = 0; r < nD; r++) wTmp[est[dataPos[r]]] = x[r];
            fromWorking(model, layout, wTmp, thetaTmp);
            model.meanPhi(i, thetaTmp, meanRow);
            for (let j = 0; j < p; j++) phiD[j] = model.parameters[j].etaIndex >= 0 ? phi[j] : meanRow[j];
            a = thetaTmp.a;
            b = thetaTmp.b;
            for (let r = 0; r < nD; r++) wTmp[est[dataPos[r]]] = w0[est[dataPos[r]]];
            let slot = -1;
            for (let c = 0; c < cacheUsed && slot < 0; c++) {
              let same = true;
              for (let q = 0; q < nS && same; q++) same = cacheKeys[c * nS + q] === x[structuralSlots[q]];
              if (same) slot = c;
            }
            const n = sub.nObs;
            if (slot < 0) {
              slot = cacheUsed < cacheCapacity ? cacheUsed++ : cacheNext++ % cacheCapacity;
              for (let q = 0; q < nS; q++) cacheKeys[slot * nS + q] = x[structuralSlots[q]];
              const out = cachePredictions.subarray(slot * maxObs, slot * maxObs + n);
              cacheValid[slot] = model.predict(i, phiD, out) ? 1 : 0;
            }
            if (!cacheValid[slot]) return -Infinity;
            return model.logLikFromPredictions(i, cachePredictions.subarray(slot * maxObs, slot * maxObs + n), a, b);
          }
          for (let r = 0; r < nD; r++) {
            const en = layout.entries[est[dataPos[r]]];
            if (en.index === 0) a = Math.exp(x[r]);
            else b = Math.exp(x[r]);
          }
          return model.logLikFromPredictions(i, f, a, b);
        };
        const negDataLL = (x: Float64Array) => -dataLL(x);
        sumG.fill(0);
        sumGG.fill(0);
        let used = 0;
        for (let m = 0; m < n; m++) {
          const draw = conditional.draws.subarray((i * conditional.keepDraws + m) * d, (i * conditional.keepDraws + m + 1) * d);
          density.phiOf(i, draw, phi);
          g.fill(0);
          H.fill(0);
          // Population density: e = phi_bsv - m_i(theta) = the draw itself at theta_hat.
          for (let k = 0; k < d; k++) e[k] = draw[k];
          for (let r = 0; r < d; r++) {
            let s = 0;
            for (let c = 0; c < d; c++) s += A[r * d + c] * e[c];
            Ae[r] = s;
          }
          for (let x = 0; x < nO; x++)
            for (let r = 0; r < d; r++) {
              let s = 0;
              for (let c = 0; c < d; c++) s += Aa[x * d * d + r * d + c] * e[c];
              Aae[x * d + r] = s;
            }
          meanPos.forEach((a, r) => {
            let s = 0;
            for (let k = 0; k < d; k++) s += dm[r * d + k] * Ae[k];
            g[a] += s;
            meanPos.forEach((b2, r2) => {
              let h = 0;
              for (let k = 0; k < d; k++) for (let k2 = 0; k2 < d; k2++) h -= dm[r * d + k] * A[k * d + k2] * dm[r2 * d + k2];
              H[a * P + b2] += h;
            });
            for (let x = 0; x < nO; x++) {
              let h = 0;
              for (let k = 0; k < d; k++) h += dm[r * d + k] * Aae[x * d + k];
              H[a * P + omegaPos[x]] += h;
              H[omegaPos[x] * P + a] += h;
            }
          });
          for (let x = 0; x < nO; x++) {
            let q = 0;
            for (let k = 0; k < d; k++) q += e[k] * Aae[x * d + k];
            g[omegaPos[x]] += ca[x] - 0.5 * q;
            for (let y = 0; y < nO; y++) {
              let q2 = 0;
              const base = (x * nO + y) * d * d;
              for (let r = 0; r < d; r++) {
                let s = 0;
                for (let c = 0; c < d; c++) s += Aab[base + r * d + c] * e[c];
                q2 += e[r] * s;
              }
              H[omegaPos[x] * P + omegaPos[y]] += cab[x * nO + y] - 0.5 * q2;
            }
          }
          // Data part: analytic in the residual terms for quantified levels, else finite differences.
          if (nD > 0) {
            if (!model.predict(i, phi, f)) continue;
            let sign = 1;
            if (analyticResidual && sub.nCensored === 0) {
              if (!residualDerivatives(model.residualModel, theta.a, theta.b, sub.y, f, residualWhich, gD, hD)) continue;
            } else {
              for (let r = 0; r < nD; r++) xD[r] = w0[est[dataPos[r]]];
              cacheUsed = 0; // a new draw: its predictions differ
              centralGradient(negDataLL, xD, gD, FD);
              centralHessian(negDataLL, xD, hD, FD);
              sign = -1;
            }
            let finite = true;
            for (let r = 0; r < nD; r++) {
              if (!Number.isFinite(gD[r])) finite = false;
              g[dataPos[r]] += sign * gD[r];
              for (let r2 = 0; r2 < nD; r2++) {
                if (!Number.isFinite(hD[r * nD + r2])) finite = false;
                H[dataPos[r] * P + dataPos[r2]] += sign * hD[r * nD + r2];
              }
            }
            if (!finite) continue;
          }
          used++;
          for (let a = 0; a < P; a++) {
            sumG[a] += g[a];
            for (let b2 = 0; b2 < P; b2++) sumGG[a * P + b2] += H[a * P + b2] + g[a] * g[b2];
          }
        }
        usedFlag[i] = used > 0 ? 1 : 0;
        if (used === 0) continue;
        const cBase = i * P * P;
        for (let a = 0; a < P; a++)
          for (let b2 = 0; b2 < P; b2++) contribution[cBase + a * P + b2] = sumGG[a * P + b2] / used - (sumG[a] / used) * (sumG[b2] / used);
      }
    },
  };
}

/** The information: minus the subjects' terms summed in subject order, then its warnings. */
export function concludeLouis(model: CompiledModel, layout: ParameterLayout, parts: LouisParts, omegaOk: boolean): Information {
  const N = model.nSubjects;
  const P = layout.estimated.length;
  const info = new Float64Array(P * P);
  let skipped = 0;
  for (let i = 0; i < N; i++) {
    if (!parts.used[i]) {
      skipped++;
      continue;
    }
    const cBase = i * P * P;
    for (let a = 0; a < P; a++) for (let b2 = 0; b2 < P; b2++) info[a * P + b2] -= parts.contribution[cBase + a * P + b2];
  }
  const warnings: string[] = [];
  if (skipped) warnings.push(`Louis' formula: ${skipped} subject(s) had no usable conditional draw and add nothing to the information`);
  if (!omegaOk) warnings.push("Louis' formula: Omega is not positive definite at the estimate");
  for (let a = 0; a < P; a++) for (let b2 = 0; b2 < a; b2++) info[a * P + b2] = info[b2 * P + a] = 0.5 * (info[a * P + b2] + info[b2 * P + a]);
  return { method: 'stochastic approximation (Louis)', matrix: info, size: P, warnings };
}

/**
 * Gradient and Hessian of sum_j log N(y_j; f_j, u_j) in the working residual terms (log a,
 * log b), u = a^2 + b^2 f^2 (additive: b = 0; proportional: a = 0; log-additive: on log y with
 * u = a^2), for quantified levels: d ll / d u = r^2 / (2 u^2) - 1 / (2 u), d2 ll / d u2 =
 * -r^2 / u^3 + 1 / (2 u^2), d u / d log a = 2 a^2, d u / d log b = 2 b^2 f^2 (chain rule).
 * `which[r]` is 0 for a, 1 for b. False when a variance is not positive.
 */
export function residualDerivatives(rm: CompiledModel['residualModel'], a: number, b: number, y: ArrayLike<number>, f: ArrayLike<number>, which: Int32Array, g: Float64Array, h: Float64Array): boolean {
  const nD = which.length;
  g.fill(0);
  h.fill(0);
  const hasA = rm !== 'proportional';
  const hasB = rm === 'proportional' || rm === 'combined';
  const logScale = rm === 'log-additive';
  for (let o = 0; o < f.length; o++) {
    const r = logScale ? Math.log(y[o]) - Math.log(f[o]) : y[o] - f[o];
    const sa = hasA ? a * a : 0;
    const sb = hasB && !logScale ? b * b * f[o] * f[o] : 0;
    const u = sa + sb;
    if (!(u > 0) || !Number.isFinite(r)) return false;
    const lu = (0.5 * r * r) / (u * u) - 0.5 / u;
    const luu = (-r * r) / (u * u * u) + 0.5 / (u * u);
    for (let x = 0; x < nD; x++) {
      const dx = which[x] === 0 ? 2 * sa : 2 * sb;
      g[x] += lu * dx;
      for (let z = 0; z < nD; z++) {
        const dz = which[z] === 0 ? 2 * sa : 2 * sb;
        h[x * nD + z] += luu * dx * dz + (x === z ? lu * 2 * dx : 0);
      }
    }
  }
  return true;
}

export function linearisedInformation(lin: Linearisation, layout: ParameterLayout, theta: PopulationParameters): Information {
  const model = lin.model;
  const est = layout.estimated;
  const P = est.length;
  const w0 = toWorking(model, layout, theta);
  const w = Float64Array.from(w0);
  const th = copyTheta(theta);
  const scratch = linearisedScratch(lin);
  const x = Float64Array.from(est, (q) => w0[q]);
  const half = (v: Float64Array) => {
    for (let a = 0; a < P; a++) w[est[a]] = v[a];
    fromWorking(model, layout, w, th);
    return 0.5 * linearisedMinus2LL(lin, th, scratch);
  };
  const H = new Float64Array(P * P);
  centralHessian(half, x, H, 1e-3);
  const warnings: string[] = [];
  if (lin.censoredLeftOut > 0) warnings.push(`linearisation: ${lin.censoredLeftOut} level(s) below the LLOQ are left out of the linearised likelihood`);
  return { method: 'linearisation', matrix: H, size: P, warnings };
}

export interface StandardErrors {
  method: InformationMethod;
  /** Per layout entry (fixed ones null): SE on the natural scale, RSE %, SE on the working scale. */
  se: (number | null)[];
  rsePercent: (number | null)[];
  seWorking: (number | null)[];
  /** Correlation of the estimates (estimated entries, layout.estimated order). */
  correlation: number[][] | null;
  /** Labels of the rows of `correlation`. */
  labels: string[];
  conditionNumber: number | null;
  eigenvalues: number[] | null;
  /** False when the information could not be inverted. */
  ok: boolean;
  warnings: string[];
}

/** Condition number above which the information is reported as near-singular (common practice). */
export const NEAR_SINGULAR_CONDITION = 1e8;

export function standardErrors(model: CompiledModel, layout: ParameterLayout, theta: PopulationParameters, info: Information): StandardErrors {
  const P = info.size;
  const est = layout.estimated;
  const labels = Array.from(est, (q) => layout.entries[q].label);
  const out: StandardErrors = {
    method: info.method,
    se: layout.entries.map(() => null),
    rsePercent: layout.entries.map(() => null),
    seWorking: layout.entries.map(() => null),
    correlation: null,
    labels,
    conditionNumber: null,
    eigenvalues: null,
    ok: false,
    warnings: [...info.warnings],
  };
  const finite = info.matrix.every((v) => Number.isFinite(v));
  const values = new Float64Array(P);
  if (!finite) {
    out.warnings.push(`${info.method}: the information matrix has non-finite entries; no standard errors (check the fit for failed subjects)`);
    return out;
  }
  if (P > 0 && symmetricEigen(info.matrix, P, values)) {
    out.eigenvalues = Array.from(values);
    const lo = values[0];
    const hi = values[P - 1];
    out.conditionNumber = lo > 0 ? hi / lo : Infinity;
  }
  const chol = new Float64Array(P * P);
  const cov = new Float64Array(P * P);
  if (!cholesky(info.matrix, P, chol)) {
    out.warnings.push(
      `${info.method}: the information matrix is not positive definite (smallest eigenvalue ${out.eigenvalues ? out.eigenvalues[0].toPrecision(3) : 'unknown'}), so no standard errors: some parameters are not identifiable from these data (fix them or simplify the model)`,
    );
    return out;
  }
  choleskyInverse(chol, P, cov);
  const w = toWorking(model, layout, theta);
  for (let a = 0; a < P; a++) {
    const q = est[a];
    const sw = Math.sqrt(cov[a * P + a]);
    const nat = naturalOf(model, layout.entries[q], w[q]);
    out.seWorking[q] = sw;
    out.se[q] = Math.abs(nat.derivative) * sw;
    out.rsePercent[q] = nat.value !== 0 ? (100 * Math.abs(nat.derivative) * sw) / Math.abs(nat.value) : null;
  }
  out.correlation = [];
  for (let a = 0; a < P; a++) {
    const row: number[] = [];
    for (let b = 0; b < P; b++) row.push(cov[a * P + b] / Math.sqrt(cov[a * P + a] * cov[b * P + b]));
    out.correlation.push(row);
  }
  out.ok = true;
  if (out.conditionNumber !== null && out.conditionNumber > NEAR_SINGULAR_CONDITION)
    out.warnings.push(`${info.method}: the information matrix is near-singular (condition number ${out.conditionNumber.toExponential(2)}); the standard errors of strongly correlated parameters are unreliable`);
  return out;
}
