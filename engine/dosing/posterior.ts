/**
 * One patient's posterior over the random effects eta given the levels.
 * MAP: minimise sum_j -2 log p(y_j | eta) + eta' Omega^-1 eta (the -2 log p terms include the
 * log-variance term, which matters when the error depends on the prediction; Sheiner & Beal,
 * J Pharmacokinet Biopharm 1982;10:553-571, from memory), by BFGS from several starts.
 * Draws: Metropolis-Hastings chains started at the MAP (the shared kernels of engine/mcmc), each
 * iteration an independence step from a Student-t built on the Laplace approximation and a
 * random-walk step
 * N(eta, (2.38^2 / d) Sigma) (Roberts, Gelman & Gilks, Ann Appl Probab 1997;7:110-120, from
 * memory), Sigma = (H / 2)^-1 with H the Hessian of the objective at the mode. Convergence:
 * acceptance, effective sample size (Geyer's initial positive sequence) and split R-hat
 * (Gelman et al., Bayesian Data Analysis, 3rd ed. 2013, from memory). With no levels the
 * draws come from the prior itself.
 */
import type { Dose, Observation } from '../data/types.js';
import { cholesky, inverseSpd } from '../linalg/index.js';
import type { Predictor } from '../models/types.js';
import type { RngStream } from '../rng/index.js';
import { observationLogLik } from '../stats/residual.js';
import { minimiseBfgs } from '../optim/bfgs.js';
import { centralHessian } from '../optim/finiteDifferences.js';
import { buildIndependenceKernel, buildRandomWalkKernel, logStudentTKernel, type ChainState as McmcState, type LogDensityTarget } from '../mcmc/kernels.js';
import type { PatientPrior } from './prior.js';
import type { PopulationModel } from './population.js';
import { naturalToTransformed } from '../spec/individual.js';

export interface LevelObjective {
  d: number;
  nLevels: number;
  /** -2 log p(y | eta) + eta' Omega^-1 eta (constants included); Infinity where the model fails. */
  objective(eta: Float64Array): number;
  /** -2 log p(y | eta) alone. */
  minus2LogLik(eta: Float64Array): number;
  /** Predictions at the level times for eta (into out); false on failure. */
  predict(eta: Float64Array, out: Float64Array): boolean;
  levels: readonly Observation[];
}

export function buildLevelObjective(prior: PatientPrior, doses: readonly Dose[], levels: readonly Observation[]): LevelObjective {
  const d = prior.nEta;
  const n = levels.length;
  const times = Float64Array.from(levels, (o) => o.timeH);
  const y = Float64Array.from(levels, (o) => o.valueMgL);
  const cens = Uint8Array.from(levels, (o) => (o.censored ? 1 : 0));
  const lloq = Float64Array.from(levels, (o) => o.lloqMgL ?? o.valueMgL);
  const predictor: Predictor | null = n > 0 ? prior.model.prepare(doses, times) : null;
  const params = new Float64Array(prior.model.parameterOrder.length);
  const f = new Float64Array(n);
  const { model: rm, a, b } = prior.residual;
  const oi = prior.omegaInv;
  const predict = (eta: Float64Array, out: Float64Array): boolean => {
    if (!prior.toModelVector(eta, params)) return false;
    return predictor ? predictor(params, out) : true;
  };
  const minus2LogLik = (eta: Float64Array): number => {
    if (!predict(eta, f)) return Infinity;
    let s = 0;
    for (let j = 0; j < n; j++) s += observationLogLik(rm, a, b, y[j], f[j], cens[j] === 1, lloq[j]);
    const v = -2 * s;
    return v === v ? v : Infinity;
  };
  const objective = (eta: Float64Array): number => {
    let q = 0;
    for (let i = 0; i < d; i++) {
      let r = 0;
      for (let j = 0; j < d; j++) r += oi[i * d + j] * eta[j];
      q += eta[i] * r;
    }
    return minus2LogLik(eta) + q;
  };
  return { d, nLevels: n, objective, minus2LogLik, predict, levels };
}

export interface MapResult {
  eta: Float64Array;
  objective: number;
  converged: boolean;
  starts: number;
  /** Starts whose optimum differs from the best by more than 1e-3 in objective (local optima). */
  otherOptima: number;
  /** Laplace covariance of eta at the mode; null when the Hessian is not positive definite. */
  covariance: Float64Array | null;
}

/** MAP by BFGS from eta = 0 and from +-1.5 prior SD along every random effect. */
export function findMap(obj: LevelObjective, prior: PatientPrior): MapResult {
  const d = obj.d;
  if (d === 0) return { eta: new Float64Array(0), objective: obj.objective(new Float64Array(0)), converged: true, starts: 0, otherOptima: 0, covariance: new Float64Array(0) };
  const starts: Float64Array[] = [new Float64Array(d)];
  for (let k = 0; k < d; k++)
    for (const sgn of [1.5, -1.5]) {
      const s = new Float64Array(d);
      s[k] = sgn * Math.sqrt(prior.omega[k * (d + 1)]);
      starts.push(s);
    }
  let best = null as ReturnType<typeof minimiseBfgs> | null;
  const values: number[] = [];
  for (const s of starts) {
    const r = minimiseBfgs(obj.objective, s);
    values.push(r.fx);
    if (!best || r.fx < best.fx) best = r;
  }
  const b = best as ReturnType<typeof minimiseBfgs>;
  // Polish from the best point (a restart resets the curvature estimate).
  const polished = minimiseBfgs(obj.objective, b.x);
  const fin = polished.fx <= b.fx ? polished : b;
  const otherOptima = values.filter((v) => Number.isFinite(v) && v - fin.fx > 1e-3).length;
  const H = new Float64Array(fin.x.length * fin.x.length);
  centralHessian(obj.objective, Float64Array.from(fin.x), H);
  // The objective is -2 log posterior: covariance = (H / 2)^-1.
  for (let i = 0; i < H.length; i++) H[i] *= 0.5;
  const cov = new Float64Array(d * d);
  const ok = inverseSpd(H, d, cov);
  return { eta: fin.x, objective: fin.fx, converged: fin.converged && Number.isFinite(fin.fx), starts: starts.length, otherOptima, covariance: ok ? cov : null };
}

export interface SamplerOptions {
  nDraws: number;
  chains: number;
  burnIn: number;
  thin: number;
  /** Degrees of freedom of the independence proposal. */
  tDf: number;
}

export const DEFAULT_SAMPLER: SamplerOptions = { nDraws: 2000, chains: 4, burnIn: 100, thin: 1, tDf: 5 };

export interface SamplerDiagnostics {
  /** prior: no levels; mcmc: chains run here; post-fit: a fitted subject's draws from the site fit. */
  method: 'prior' | 'mcmc' | 'post-fit';
  /** For post-fit: the fit's subject whose draws are the posterior. */
  postFitSubject?: string;
  chains: number;
  burnIn: number;
  thin: number;
  acceptanceIndependence: number | null;
  acceptanceRandomWalk: number | null;
  /** Per random effect. */
  ess: number[];
  rhat: number[];
  /** Proposal covariance came from the prior because the Laplace Hessian was not positive definite. */
  proposalFromPrior: boolean;
}

export interface PosteriorDraws {
  nDraws: number;
  /** nDraws x d, chain after chain. */
  eta: Float64Array;
  diagnostics: SamplerDiagnostics;
}

/** Chain state of the dosing sampler: what the next step needs. */
export interface ChainState {
  /** Current random effects (transformed scale). */
  eta: Float64Array;
  /** Its log posterior, -objective / 2. */
  logPost: number;
  /** Its log density under the independence proposal (up to a constant). */
  logQ: number;
}

/** One Metropolis-Hastings step on a chain state: moves `state` in place; true when accepted. */
export type Kernel = (rng: RngStream, state: ChainState) => boolean;

export interface KernelSet {
  independence: Kernel;
  randomWalk: Kernel;
  /** log q of the independence proposal, for initialising a state. */
  logQ(x: Float64Array): number;
}

/**
 * The dosing configuration of the shared kernels (engine/mcmc): an independence step from a
 * multivariate Student-t (df nu) centred at `centre` with scale Sigma = L L', and a random walk
 * N(eta, (2.38^2 / d) Sigma). Built once; non-finite log densities are rejections.
 */
export function buildKernels(logPost: (x: Float64Array) => number, centre: Float64Array, L: Float64Array, nu: number): KernelSet {
  const d = centre.length;
  const ind = buildIndependenceKernel({ dim: d, df: nu, priorProposal: false });
  const rw = buildRandomWalkKernel(d);
  const target: LogDensityTarget = { dim: d, logLikelihood: logPost, logPrior: () => 0 };
  const rwScale = 2.38 / Math.sqrt(d);
  const z = new Float64Array(d);
  const inner: McmcState = { position: centre, logLikelihood: 0, logPrior: 0 };
  const logQ = (x: Float64Array): number => logStudentTKernel(x, centre, L, d, nu, z);
  const independence: Kernel = (r, state) => {
    inner.position = state.eta;
    inner.logLikelihood = state.logPost;
    if (!ind.step(r, target, inner, centre, L)) return false;
    state.logPost = inner.logLikelihood;
    state.logQ = logQ(state.eta);
    return true;
  };
  const randomWalk: Kernel = (r, state) => {
    inner.position = state.eta;
    inner.logLikelihood = state.logPost;
    if (!rw.step(r, target, inner, L, rwScale)) return false;
    state.logPost = inner.logLikelihood;
    state.logQ = logQ(state.eta);
    return true;
  };
  return { independence, randomWalk, logQ };
}

/** Draws from the prior N(0, Omega). */
export function drawPrior(prior: PatientPrior, rng: RngStream, nDraws: number): PosteriorDraws {
  const d = prior.nEta;
  const out = new Float64Array(nDraws * d);
  const z = new Float64Array(d);
  const L = prior.omegaChol;
  for (let k = 0; k < nDraws; k++) {
    rng.fillNormal(z);
    for (let i = 0; i < d; i++) {
      let v = 0;
      for (let j = 0; j <= i; j++) v += L[i * d + j] * z[j];
      out[k * d + i] = v;
    }
  }
  return { nDraws, eta: out, diagnostics: { method: 'prior', chains: 1, burnIn: 0, thin: 1, acceptanceIndependence: null, acceptanceRandomWalk: null, ess: Array(d).fill(nDraws), rhat: Array(d).fill(1), proposalFromPrior: false } };
}

/** MCMC draws from the posterior, started at the MAP. */
export function samplePosterior(obj: LevelObjective, prior: PatientPrior, map: MapResult, rng: RngStream, options: Partial<SamplerOptions> = {}): PosteriorDraws {
  const o = { ...DEFAULT_SAMPLER, ...options };
  const d = obj.d;
  if (d === 0) return { nDraws: o.nDraws, eta: new Float64Array(0), diagnostics: { method: 'mcmc', chains: 0, burnIn: 0, thin: 1, acceptanceIndependence: null, acceptanceRandomWalk: null, ess: [], rhat: [], proposalFromPrior: false } };
  const sigma = map.covariance ?? prior.omega;
  const L = new Float64Array(d * d);
  let proposalFromPrior = map.covariance === null;
  if (!cholesky(sigma, d, L)) {
    cholesky(prior.omega, d, L);
    proposalFromPrior = true;
  }
  const perChain = Math.ceil(o.nDraws / o.chains);
  const out = new Float64Array(perChain * o.chains * d);
  const logPost = (x: Float64Array) => -0.5 * obj.objective(x);
  const kernels = buildKernels(logPost, map.eta, L, o.tDf);
  let accI = 0;
  let accR = 0;
  let steps = 0;
  for (let c = 0; c < o.chains; c++) {
    const r = rng.stream('chain', c);
    const start = Float64Array.from(map.eta);
    const state: ChainState = { eta: start, logPost: logPost(start), logQ: kernels.logQ(start) };
    let kept = 0;
    const total = o.burnIn + perChain * o.thin;
    for (let it = 0; it < total; it++) {
      const a1 = kernels.independence(r, state);
      const a2 = kernels.randomWalk(r, state);
      if (it < o.burnIn) continue;
      steps++;
      if (a1) accI++;
      if (a2) accR++;
      if ((it - o.burnIn) % o.thin === o.thin - 1) {
        out.set(state.eta, (c * perChain + kept) * d);
        kept++;
      }
    }
  }
  const nDraws = perChain * o.chains;
  const ess: number[] = [];
  const rhat: number[] = [];
  const col = new Float64Array(nDraws);
  for (let i = 0; i < d; i++) {
    for (let k = 0; k < nDraws; k++) col[k] = out[k * d + i];
    ess.push(effectiveSampleSize(col, o.chains));
    rhat.push(splitRhat(col, o.chains));
  }
  return {
    nDraws,
    eta: out,
    diagnostics: { method: 'mcmc', chains: o.chains, burnIn: o.burnIn, thin: o.thin, acceptanceIndependence: accI / steps, acceptanceRandomWalk: accR / steps, ess, rhat, proposalFromPrior },
  };
}

/** ESS summed over equal-length chains laid end to end (Geyer's initial positive sequence). */
export function effectiveSampleSize(x: Float64Array, chains: number): number {
  const n = Math.floor(x.length / chains);
  let total = 0;
  for (let c = 0; c < chains; c++) {
    const s = x.subarray(c * n, (c + 1) * n);
    let mean = 0;
    for (let i = 0; i < n; i++) mean += s[i];
    mean /= n;
    const acov = (lag: number) => {
      let v = 0;
      for (let i = 0; i + lag < n; i++) v += (s[i] - mean) * (s[i + lag] - mean);
      return v / n;
    };
    const v0 = acov(0);
    if (!(v0 > 0)) continue;
    let sum = 0;
    for (let t = 0; t + 1 < n; t += 2) {
      const pair = (acov(t) + acov(t + 1)) / v0;
      if (pair <= 0) break;
      sum += pair;
    }
    const tau = Math.max(2 * sum - 1, 1 / Math.log10(Math.max(n, 10)));
    total += n / tau;
  }
  return total;
}

/** Split R-hat over chains laid end to end. */
export function splitRhat(x: Float64Array, chains: number): number {
  const n = Math.floor(x.length / chains);
  const half = Math.floor(n / 2);
  if (half < 2) return NaN;
  const m = 2 * chains;
  const means: number[] = [];
  const vars: number[] = [];
  for (let c = 0; c < chains; c++)
    for (let h = 0; h < 2; h++) {
      const s = x.subarray(c * n + h * half, c * n + (h + 1) * half);
      let mu = 0;
      for (let i = 0; i < half; i++) mu += s[i];
      mu /= half;
      let v = 0;
      for (let i = 0; i < half; i++) v += (s[i] - mu) ** 2;
      means.push(mu);
      vars.push(v / (half - 1));
    }
  const grand = means.reduce((a, b) => a + b, 0) / m;
  const B = (half * means.reduce((a, b) => a + (b - grand) ** 2, 0)) / (m - 1);
  const W = vars.reduce((a, b) => a + b, 0) / m;
  if (!(W > 0)) return 1;
  return Math.sqrt(((half - 1) / half) * W + B / half) / Math.sqrt(W);
}

/** One subject of a site fit: its post-fit draws and the levels the fit saw. */
export interface FitSubjectPosterior {
  /** Thinned draws from p(psi_i | y_i; theta_hat) per parameter, natural scale (fit.json individual[].draws). */
  draws: Readonly<Record<string, readonly number[]>>;
  nDraws: number;
  /** The subject's levels in the fit (fit.json diagnostics.observations); null when the fit does not record them. */
  levels: ReadonlyArray<{ timeH: number; concMgL: number; censored: boolean }> | null;
}

const isObj = (x: unknown): x is Record<string, unknown> => typeof x === 'object' && x !== null && !Array.isArray(x);

/**
 * The fitted subjects of a fit.json (subject id -> draws and levels). Subjects without usable
 * draws are left out: they are optional data, and the patient's posterior is then computed anew.
 */
export function parseFitSubjects(fit: Record<string, unknown>): Map<string, FitSubjectPosterior> {
  const out = new Map<string, FitSubjectPosterior>();
  const levels = new Map<string, Array<{ timeH: number; concMgL: number; censored: boolean }>>();
  const obs = isObj(fit.diagnostics) && Array.isArray(fit.diagnostics.observations) ? fit.diagnostics.observations : null;
  if (obs)
    for (const o of obs) {
      if (!isObj(o) || typeof o.subject !== 'string' || typeof o.timeH !== 'number' || typeof o.dv !== 'number') continue;
      let l = levels.get(o.subject);
      if (!l) levels.set(o.subject, (l = []));
      l.push({ timeH: o.timeH, concMgL: o.dv, censored: o.censored === true });
    }
  if (!Array.isArray(fit.individual)) return out;
  for (const e of fit.individual) {
    if (!isObj(e) || typeof e.subject !== 'string' || !isObj(e.draws)) continue;
    const draws: Record<string, number[]> = Object.create(null);
    let n = -1;
    let ok = true;
    for (const [name, v] of Object.entries(e.draws)) {
      if (!Array.isArray(v) || !v.every((x) => typeof x === 'number' && Number.isFinite(x)) || (n >= 0 && v.length !== n)) ok = false;
      else {
        n = v.length;
        draws[name] = v as number[];
      }
    }
    if (!ok || n <= 0) continue;
    out.set(e.subject, { draws, nDraws: n, levels: obs ? (levels.get(e.subject) ?? []) : null });
  }
  return out;
}

/** Whether a level is one the fit saw: same time (within 1e-3 h), censoring and value (relative 1e-6). */
function sameLevel(a: Observation, b: { timeH: number; concMgL: number; censored: boolean }): boolean {
  if (Math.abs(a.timeH - b.timeH) > 1e-3) return false;
  if (a.censored !== b.censored) return false;
  if (a.censored) return true;
  return Math.abs(a.valueMgL - b.concMgL) <= 1e-6 * Math.max(1, Math.abs(b.concMgL));
}

/**
 * The posterior of a patient who is a subject of the site fit and brings no level the fit did
 * not see: that subject's post-fit draws (the estimator's conditional distribution at the final
 * estimates), mapped to this prior's eta. Null otherwise (the posterior is then computed anew).
 */
export function postFitDraws(population: PopulationModel, patientId: string, levels: readonly Observation[], prior: PatientPrior): PosteriorDraws | null {
  const fs = population.fitSubjects?.get(patientId);
  if (!fs || fs.levels === null) return null;
  const seen = fs.levels;
  if (!levels.every((l) => seen.some((m) => sameLevel(l, m)))) return null;
  const d = prior.nEta;
  const n = fs.nDraws;
  const eta = new Float64Array(n * d);
  for (const p of prior.parameters) {
    if (p.etaIndex < 0) continue;
    const col = fs.draws[p.name];
    if (!col) return null;
    for (let k = 0; k < n; k++) {
      const e = naturalToTransformed(p.transform, col[k]) - p.phiMean;
      if (!Number.isFinite(e)) return null;
      eta[k * d + p.etaIndex] = e;
    }
  }
  const ess: number[] = [];
  const rhat: number[] = [];
  const c = new Float64Array(n);
  for (let i = 0; i < d; i++) {
    for (let k = 0; k < n; k++) c[k] = eta[k * d + i];
    ess.push(effectiveSampleSize(c, 1));
    rhat.push(splitRhat(c, 1));
  }
  return {
    nDraws: n,
    eta,
    diagnostics: { method: 'post-fit', postFitSubject: patientId, chains: 1, burnIn: 0, thin: 1, acceptanceIndependence: null, acceptanceRandomWalk: null, ess, rhat, proposalFromPrior: false },
  };
}
