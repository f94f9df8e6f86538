/**
 * The simulation step of SAEM (engine/saem/saem.ts): per subject and chain, the Metropolis-Hastings
 * kernels of engine/mcmc over eta_i = phi_i - mean_i, then imputation of the censored levels from
 * their truncated conditional distribution; plus the chain refresh after an M-step. The state is
 * built once per fit (`createSimulationState`) and every step works in place, allocation-free.
 * One random stream per subject and chain (keyed by the seed), so results do not depend on the
 * order of work.
 */
import { createStreams, type RngStream } from '../rng/index.js';
import type { CompiledModel, PopulationParameters } from '../stats/model.js';
import { choleskyLower, invertFromCholesky } from '../stats/dense.js';
import { residualSd } from '../stats/residual.js';
import { truncatedNormalBelow } from '../stats/normalTail.js';
import type { SaemSettings } from './settings.js';
import {
  buildComponentwiseKernel,
  buildIndependenceKernel,
  buildRandomWalkKernel,
  scaleAdaptation,
  type ChainState,
  type ComponentwiseKernel,
  type IndependenceKernel,
  type LogDensityTarget,
  type RandomWalkKernel,
  type ScaleAdaptation,
  type ScaleAdaptationState,
} from '../mcmc/kernels.js';

/** Omega's Cholesky factor (for proposals), inverse (for the prior) and SDs, refreshed after each M-step. */
export interface OmegaFactor {
  readonly nEta: number;
  readonly cholesky: Float64Array;
  readonly inverse: Float64Array;
  readonly sd: Float64Array;
}

export function createOmegaFactor(nEta: number): OmegaFactor {
  return { nEta, cholesky: new Float64Array(nEta * nEta), inverse: new Float64Array(nEta * nEta), sd: new Float64Array(nEta) };
}

/** Factor `omega` into `factor`; false (factor partly written) when it is not positive definite. */
export function refreshOmegaFactor(factor: OmegaFactor, omega: Float64Array): boolean {
  const nEta = factor.nEta;
  if (nEta === 0) return true;
  if (!choleskyLower(omega, nEta, factor.cholesky)) return false;
  invertFromCholesky(factor.cholesky, nEta, factor.inverse);
  for (let k = 0; k < nEta; k++) factor.sd[k] = Math.sqrt(omega[k * nEta + k]);
  return true;
}

/** Acceptance counts of the kernels, per iteration and summed over the fit. */
export interface KernelAcceptance {
  independentAccepted: number;
  independentTries: number;
  randomWalkAccepted: number;
  randomWalkTries: number;
  adaptiveAccepted: number;
  adaptiveTries: number;
  readonly componentAccepted: Float64Array;
  readonly componentTries: Float64Array;
}

function createAcceptance(nEta: number): KernelAcceptance {
  return {
    independentAccepted: 0,
    independentTries: 0,
    randomWalkAccepted: 0,
    randomWalkTries: 0,
    adaptiveAccepted: 0,
    adaptiveTries: 0,
    componentAccepted: new Float64Array(nEta),
    componentTries: new Float64Array(nEta),
  };
}

/**
 * The per-chain arrays every thread of a fit works on (engine/saem/threads.ts): plain arrays for
 * one thread, views over SharedArrayBuffers when subject blocks run on other threads. Each thread
 * writes only its own subjects' entries.
 */
export interface ChainBuffers {
  /** chains x nParams */
  readonly phi: Float64Array;
  /** chains */
  readonly logLik: Float64Array;
  /** chains x nEta */
  readonly eta: Float64Array;
  /** subjects x nParams */
  readonly meanPhi: Float64Array;
  /** chains-per-subject x nObsTotal, subject-major */
  readonly predictions: Float64Array;
  readonly levels: Float64Array;
}

/** Lengths of the chain buffers, in Float64 elements. */
export function chainBufferLengths(model: CompiledModel, chains: number): Record<keyof ChainBuffers, number> {
  const NL = model.nSubjects * chains;
  return { phi: NL * model.nParams, logLik: NL, eta: NL * model.nEta, meanPhi: model.nSubjects * model.nParams, predictions: chains * model.nObsTotal, levels: chains * model.nObsTotal };
}

/** Allocate the chain buffers; over SharedArrayBuffers when `shared`. */
export function allocateChainBuffers(model: CompiledModel, chains: number, shared: boolean): ChainBuffers {
  const lengths = chainBufferLengths(model, chains);
  const make = (n: number) => (shared ? new Float64Array(new SharedArrayBuffer(8 * Math.max(1, n)), 0, n) : new Float64Array(n));
  return { phi: make(lengths.phi), logLik: make(lengths.logLik), eta: make(lengths.eta), meanPhi: make(lengths.meanPhi), predictions: make(lengths.predictions), levels: make(lengths.levels) };
}

/** Where a simulation state lives: its buffers and the subjects [from, to) this thread steps. */
export interface SimulationPlacement {
  buffers: ChainBuffers;
  from: number;
  to: number;
  /** Start the chains (false on a block thread: the coordinating thread started them in the shared buffers). */
  initialise: boolean;
}

/** Everything the simulation step keeps between iterations. Chain index = subject * chains + chain. */
export interface SimulationState {
  readonly model: CompiledModel;
  readonly settings: SaemSettings;
  readonly chains: number;
  /** The subjects [from, to) whose chains this state steps (their random streams live here). */
  readonly from: number;
  readonly to: number;
  readonly buffers: ChainBuffers;
  readonly omegaFactor: OmegaFactor;
  /** Current draw of phi (transformed scale) per chain, chains x nParams. */
  readonly phiByChain: Float64Array;
  /** log p(y_i | phi) at the current draw, per chain. */
  readonly logLikByChain: Float64Array;
  /** Population mean of phi per subject under the current theta, subjects x nParams. */
  readonly meanPhiBySubject: Float64Array;
  /** Predictions (mg/L) at the current draw, one view per chain. */
  readonly predictionsByChain: Float64Array[];
  /** Levels (mg/L) per chain: observed, or imputed below the LLOQ for censored ones. */
  readonly levelsByChain: Float64Array[];
  /** Predictions of the last proposal, one view per subject over a shared buffer. */
  readonly proposalPredictions: Float64Array[];
  /** Scratch phi of a proposal. */
  readonly proposalPhi: Float64Array;
  readonly meanPhiScratch: Float64Array;
  /** One stream per chain of [from, to) (entries of other subjects are not created). */
  readonly streams: RngStream[];
  /** Chain states of the kernels; position = eta of the chain. */
  readonly chainStates: ChainState[];
  readonly subjectTarget: LogDensityTarget & { subject: number; chain: number; theta: PopulationParameters };
  readonly independentKernel: IndependenceKernel;
  readonly randomWalkKernel: RandomWalkKernel;
  readonly componentKernel: ComponentwiseKernel;
  readonly zeroCentre: Float64Array;
  /** Component step SDs (scale x omega SD) of this iteration. */
  readonly componentSd: Float64Array;
  readonly kappaAdaptation: ScaleAdaptation;
  readonly componentAdaptation: ScaleAdaptation;
  readonly subjectAdaptation: ScaleAdaptation;
  /** kappa: variance multiplier of the full random walk N(phi, kappa Omega). */
  readonly kappa: ScaleAdaptationState;
  /** Component step SDs in units of each omega SD. */
  readonly componentScale: ScaleAdaptationState;
  /** Variance multiplier of the subject-shaped random walk. */
  readonly subjectScale: ScaleAdaptationState;
  /** Per-subject covariance of the draws (exponentially weighted over search) and its factor. */
  readonly subjectWeight: Float64Array;
  readonly subjectSum: Float64Array;
  readonly subjectCrossSum: Float64Array;
  readonly subjectCovariance: Float64Array;
  readonly subjectCholesky: Float64Array[];
  readonly subjectCholeskyReady: Uint8Array;
  subjectCovarianceUpdates: number;
  readonly iterationAcceptance: KernelAcceptance;
  readonly totalAcceptance: KernelAcceptance;
}

/** Log-likelihood of a proposed phi (subject i) into state.proposalPredictions[i]. */
export function proposalLogLik(state: SimulationState, i: number, phi: Float64Array, a: number, b: number): number {
  const f = state.proposalPredictions[i];
  if (!state.model.predict(i, phi, f)) return -Infinity;
  return state.model.logLikFromPredictions(i, f, a, b);
}

function quadraticFormOmegaInverse(omegaInverse: Float64Array, nEta: number, eta: Float64Array): number {
  let q = 0;
  for (let r = 0; r < nEta; r++) {
    let row = 0;
    for (let c = 0; c < nEta; c++) row += omegaInverse[r * nEta + c] * eta[c];
    q += eta[r] * row;
  }
  return q;
}

/** Population means of phi under theta for the subjects [from, to) (default: the state's own). */
export function refreshMeans(state: SimulationState, theta: PopulationParameters, from = state.from, to = state.to): void {
  const { model, meanPhiBySubject, meanPhiScratch } = state;
  const p = model.nParams;
  for (let i = from; i < to; i++) {
    model.meanPhi(i, theta, meanPhiScratch);
    meanPhiBySubject.set(meanPhiScratch, i * p);
  }
}

/**
 * Build the state and (placement.initialise) start every chain at its subject's population mean;
 * a subject whose start gives an impossible prediction gets a warning in `warnings`. By default
 * one thread owns every subject over plain arrays.
 */
export function createSimulationState(
  model: CompiledModel,
  settings: SaemSettings,
  chains: number,
  theta: PopulationParameters,
  omegaFactor: OmegaFactor,
  warnings: string[],
  placement: SimulationPlacement = { buffers: allocateChainBuffers(model, chains, false), from: 0, to: model.nSubjects, initialise: true },
): SimulationState {
  const N = model.nSubjects;
  const p = model.nParams;
  const nEta = model.nEta;
  const L = chains;
  const NL = N * L;
  const subjects = model.subjects;
  const etaParam = model.etaParameter;
  const hasEta = Uint8Array.from(model.parameters, (q) => (q.etaIndex >= 0 ? 1 : 0));

  const { buffers, from, to } = placement;
  const phiByChain = buffers.phi;
  const logLikByChain = buffers.logLik;
  const meanPhiBySubject = buffers.meanPhi;
  const obsOffset = new Int32Array(N + 1);
  for (let i = 0; i < N; i++) obsOffset[i + 1] = obsOffset[i] + subjects[i].nObs;
  const predictionsByChain: Float64Array[] = new Array(NL);
  const levelsByChain: Float64Array[] = new Array(NL);
  for (let i = 0; i < N; i++)
    for (let c = 0; c < L; c++) {
      const s = i * L + c;
      const off = L * obsOffset[i] + c * subjects[i].nObs;
      predictionsByChain[s] = buffers.predictions.subarray(off, off + subjects[i].nObs);
      levelsByChain[s] = buffers.levels.subarray(off, off + subjects[i].nObs);
      if (placement.initialise) levelsByChain[s].set(subjects[i].y);
    }
  let maxObs = 0;
  for (const s of subjects) maxObs = Math.max(maxObs, s.nObs);
  const proposalBuffer = new Float64Array(maxObs);
  const proposalPredictions = subjects.map((s) => proposalBuffer.subarray(0, s.nObs));
  const proposalPhi = new Float64Array(p);

  const root = createStreams(settings.seed);
  const streams: RngStream[] = new Array(NL);
  for (let i = from; i < to; i++) for (let c = 0; c < L; c++) streams[i * L + c] = root.stream('saem', 'subject', i, 'chain', c);

  // Kernel adaptation (scales relative to Omega) towards the target acceptance, one update per
  // search iteration, frozen after search (DESIGN.md §5).
  const target = settings.targetAcceptance;
  const kappaAdaptation = scaleAdaptation({ target, rate: 0.4, min: 1e-4, max: 10 });
  const componentAdaptation = scaleAdaptation({ target, rate: 0.4, min: 1e-3, max: 10 });
  const subjectAdaptation = scaleAdaptation({ target, rate: 0.4, min: 1e-4, max: 20 });
  const kappa = kappaAdaptation.init(1, nEta > 0 ? 2.38 * 2.38 / nEta / 2 : 1);
  const componentScale = componentAdaptation.init(nEta, 0.5);

  // The kernels (engine/mcmc) move eta_i = phi_i - mean_i over the BSV components; the target is
  // p(y_i | phi_i) x N(eta_i; 0, Omega), and an accepted point keeps its predictions.
  const etaByChain = buffers.eta;
  const chainStates: ChainState[] = new Array(NL);
  for (let s = 0; s < NL; s++) chainStates[s] = { position: etaByChain.subarray(s * nEta, (s + 1) * nEta), logLikelihood: 0, logPrior: 0 };
  const state: SimulationState = {
    model,
    settings,
    chains: L,
    from,
    to,
    buffers,
    omegaFactor,
    phiByChain,
    logLikByChain,
    meanPhiBySubject,
    predictionsByChain,
    levelsByChain,
    proposalPredictions,
    proposalPhi,
    meanPhiScratch: new Float64Array(p),
    streams,
    chainStates,
    subjectTarget: undefined as unknown as SimulationState['subjectTarget'],
    // Independent proposal from N(mean_i, Omega): the prior cancels in the ratio.
    independentKernel: buildIndependenceKernel({ dim: nEta, df: null, priorProposal: true }),
    randomWalkKernel: buildRandomWalkKernel(nEta),
    componentKernel: buildComponentwiseKernel(nEta),
    zeroCentre: new Float64Array(nEta),
    componentSd: new Float64Array(nEta),
    kappaAdaptation,
    componentAdaptation,
    subjectAdaptation,
    kappa,
    componentScale,
    subjectScale: subjectAdaptation.init(1, nEta > 0 ? (2.38 * 2.38) / nEta : 1),
    subjectWeight: new Float64Array(N),
    subjectSum: new Float64Array(N * nEta),
    subjectCrossSum: new Float64Array(N * nEta * nEta),
    subjectCovariance: new Float64Array(nEta * nEta),
    subjectCholesky: [],
    subjectCholeskyReady: new Uint8Array(N),
    subjectCovarianceUpdates: 0,
    iterationAcceptance: createAcceptance(nEta),
    totalAcceptance: createAcceptance(nEta),
  };
  const subjectCholeskyBuffer = new Float64Array(N * nEta * nEta);
  for (let i = 0; i < N; i++) state.subjectCholesky.push(subjectCholeskyBuffer.subarray(i * nEta * nEta, (i + 1) * nEta * nEta));
  const subjectTarget: SimulationState['subjectTarget'] = {
    dim: nEta,
    subject: 0,
    chain: 0,
    theta,
    logLikelihood(eta) {
      const i = this.subject;
      const mBase = i * p;
      const sBase = this.chain * p;
      for (let j = 0; j < p; j++) proposalPhi[j] = hasEta[j] ? meanPhiBySubject[mBase + j] : phiByChain[sBase + j];
      for (let k = 0; k < nEta; k++) proposalPhi[etaParam[k]] += eta[k];
      return proposalLogLik(state, i, proposalPhi, this.theta.a, this.theta.b);
    },
    logPrior(eta) {
      return -0.5 * quadraticFormOmegaInverse(omegaFactor.inverse, nEta, eta);
    },
    accept() {
      predictionsByChain[this.chain].set(proposalPredictions[this.subject]);
    },
  };
  (state as { subjectTarget: SimulationState['subjectTarget'] }).subjectTarget = subjectTarget;

  // Initial chains at the population means (every subject's, by the thread that starts them).
  if (!placement.initialise) return state;
  refreshMeans(state, theta, 0, N);
  for (let i = 0; i < N; i++)
    for (let c = 0; c < L; c++) {
      const s = i * L + c;
      phiByChain.set(meanPhiBySubject.subarray(i * p, i * p + p), s * p);
      if (!model.predict(i, phiByChain.subarray(s * p, s * p + p), predictionsByChain[s])) {
        logLikByChain[s] = -Infinity;
      } else logLikByChain[s] = model.logLikFromPredictions(i, predictionsByChain[s], theta.a, theta.b);
    }
  for (let i = 0; i < N; i++)
    if (logLikByChain[i * L] === -Infinity)
      warnings.push(`subject ${subjects[i].id}: the initial typical values give an impossible prediction; the chains start there and move only if a proposal is valid`);
  return state;
}

function updateSubjectCovariances(state: SimulationState, theta: PopulationParameters, from: number, to: number): void {
  const { model, phiByChain, subjectWeight, subjectSum, subjectCrossSum, subjectCovariance } = state;
  const p = model.nParams;
  const nEta = model.nEta;
  const L = state.chains;
  const etaParam = model.etaParameter;
  const forget = 0.98;
  state.subjectCovarianceUpdates++;
  for (let i = from; i < to; i++) {
    subjectWeight[i] = forget * subjectWeight[i] + L;
    for (let q = 0; q < nEta; q++) subjectSum[i * nEta + q] *= forget;
    for (let q = 0; q < nEta * nEta; q++) subjectCrossSum[i * nEta * nEta + q] *= forget;
    for (let c = 0; c < L; c++) {
      const base = (i * L + c) * p;
      for (let k = 0; k < nEta; k++) {
        const v = phiByChain[base + etaParam[k]];
        subjectSum[i * nEta + k] += v;
        for (let k2 = 0; k2 <= k; k2++) subjectCrossSum[i * nEta * nEta + k * nEta + k2] += v * phiByChain[base + etaParam[k2]];
      }
    }
  }
  if (state.subjectCovarianceUpdates < 20 || state.subjectCovarianceUpdates % 5 !== 0) return;
  for (let i = from; i < to; i++) {
    const w = subjectWeight[i];
    for (let k = 0; k < nEta; k++)
      for (let k2 = 0; k2 <= k; k2++) {
        const v = subjectCrossSum[i * nEta * nEta + k * nEta + k2] / w - (subjectSum[i * nEta + k] / w) * (subjectSum[i * nEta + k2] / w);
        subjectCovariance[k * nEta + k2] = subjectCovariance[k2 * nEta + k] = v;
      }
    // A small share of Omega keeps the proposal non-degenerate while the chain is still stuck.
    for (let k = 0; k < nEta; k++) subjectCovariance[k * nEta + k] += 1e-3 * theta.omega[k * nEta + k];
    state.subjectCholeskyReady[i] = choleskyLower(subjectCovariance, nEta, state.subjectCholesky[i]) ? 1 : 0;
  }
}

/** Zero an acceptance record (before an iteration). */
export function resetAcceptance(acc: KernelAcceptance): void {
  acc.independentAccepted = acc.independentTries = acc.randomWalkAccepted = acc.randomWalkTries = acc.adaptiveAccepted = acc.adaptiveTries = 0;
  acc.componentAccepted.fill(0);
  acc.componentTries.fill(0);
}

/** Add `part` to `into` (counts: integers, so the sum does not depend on the order of blocks). */
export function addAcceptance(into: KernelAcceptance, part: KernelAcceptance): void {
  into.independentAccepted += part.independentAccepted;
  into.independentTries += part.independentTries;
  into.randomWalkAccepted += part.randomWalkAccepted;
  into.randomWalkTries += part.randomWalkTries;
  into.adaptiveAccepted += part.adaptiveAccepted;
  into.adaptiveTries += part.adaptiveTries;
  for (let k = 0; k < into.componentAccepted.length; k++) (into.componentAccepted[k] += part.componentAccepted[k]), (into.componentTries[k] += part.componentTries[k]);
}

/**
 * One simulation step at theta on one thread: every subject's chains, then the totals and the
 * kernel adaptation. Threads run `simulateSubjects` on their blocks and the coordinating thread
 * concludes (engine/saem/threads.ts).
 */
export function simulationStep(state: SimulationState, theta: PopulationParameters, exploring: boolean): void {
  resetAcceptance(state.iterationAcceptance);
  simulateSubjects(state, theta, exploring, state.iterationAcceptance);
  concludeSimulationStep(state, exploring);
}

/**
 * The kernels for the state's subjects [from, to) at theta, counts added to `acc`: for every
 * chain, independent proposal from N(mean_i, Omega), full random walk N(phi, kappa Omega),
 * component-wise random walk, subject-shaped random walk; then draws of the censored levels.
 * During search (`exploring`) the subjects' own covariances learn from the draws.
 */
export function simulateSubjects(state: SimulationState, theta: PopulationParameters, exploring: boolean, acc: KernelAcceptance): void {
  const { model, settings, omegaFactor, phiByChain, logLikByChain, meanPhiBySubject, chainStates, subjectTarget } = state;
  const p = model.nParams;
  const nEta = model.nEta;
  const L = state.chains;
  const etaParam = model.etaParameter;
  const residualModel = model.residualModel;
  subjectTarget.theta = theta;
  const sqrtSubjectScale = Math.sqrt(state.subjectScale.scale[0]);
  const sqrtKappa = Math.sqrt(state.kappa.scale[0]);
  for (let k = 0; k < nEta; k++) state.componentSd[k] = state.componentScale.scale[k] * omegaFactor.sd[k];
  for (let i = state.from; i < state.to; i++) {
    const mBase = i * p;
    for (let c = 0; c < L; c++) {
      const s = i * L + c;
      const rng = state.streams[s];
      const base = s * p;
      if (nEta > 0) {
        const st = chainStates[s];
        const eta = st.position;
        for (let k = 0; k < nEta; k++) eta[k] = phiByChain[base + etaParam[k]] - meanPhiBySubject[mBase + etaParam[k]];
        st.logLikelihood = logLikByChain[s];
        st.logPrior = -0.5 * quadraticFormOmegaInverse(omegaFactor.inverse, nEta, eta);
        subjectTarget.subject = i;
        subjectTarget.chain = s;
        // 1. Independent proposal from N(mean_i, Omega).
        for (let it = 0; it < settings.independentSteps; it++) {
          acc.independentTries++;
          if (state.independentKernel.step(rng, subjectTarget, st, state.zeroCentre, omegaFactor.cholesky)) acc.independentAccepted++;
        }
        // 2. Full random walk N(phi, kappa Omega).
        for (let it = 0; it < settings.randomWalkSteps; it++) {
          acc.randomWalkTries++;
          if (state.randomWalkKernel.step(rng, subjectTarget, st, omegaFactor.cholesky, sqrtKappa)) acc.randomWalkAccepted++;
        }
        // 3. Component-wise random walk with adaptive scales.
        for (let sw = 0; sw < settings.componentSweeps; sw++) {
          for (let k = 0; k < nEta; k++) acc.componentTries[k]++;
          state.componentKernel.sweep(rng, subjectTarget, st, state.componentSd, acc.componentAccepted);
        }
        // 4. Random walk shaped by the subject's own conditional covariance (adaptive
        // Metropolis, Haario, Saksman & Tamminen 2001, from memory): mixes along ridges of
        // p(phi_i | y_i) that Omega-shaped proposals cross only in tiny steps.
        if (state.subjectCholeskyReady[i] && settings.adaptiveSteps > 0)
          for (let it = 0; it < settings.adaptiveSteps; it++) {
            acc.adaptiveTries++;
            if (state.randomWalkKernel.step(rng, subjectTarget, st, state.subjectCholesky[i], sqrtSubjectScale)) acc.adaptiveAccepted++;
          }
        logLikByChain[s] = st.logLikelihood;
        for (let k = 0; k < nEta; k++) phiByChain[base + etaParam[k]] = meanPhiBySubject[mBase + etaParam[k]] + eta[k];
      }
      // Censored levels: draw from N(f, g^2) truncated below the LLOQ (log scale for log-additive).
      const sub = model.subjects[i];
      if (sub.nCensored > 0) {
        const f = state.predictionsByChain[s];
        const y = state.levelsByChain[s];
        for (let o = 0; o < sub.nObs; o++) {
          if (!sub.censored[o]) continue;
          const fo = f[o];
          if (residualModel === 'log-additive') {
            if (!(fo > 0)) {
              y[o] = sub.lloqMgL[o];
              continue;
            }
            const z = truncatedNormalBelow((Math.log(sub.lloqMgL[o]) - Math.log(fo)) / theta.a, rng.uniform());
            y[o] = fo * Math.exp(theta.a * z);
          } else {
            const g = residualSd(residualModel, theta.a, theta.b, fo);
            if (!(g > 0) || !Number.isFinite(fo)) {
              y[o] = sub.lloqMgL[o];
              continue;
            }
            y[o] = fo + g * truncatedNormalBelow((sub.lloqMgL[o] - fo) / g, rng.uniform());
          }
        }
      }
    }
  }
  if (exploring && nEta > 0 && settings.adaptiveSteps > 0) updateSubjectCovariances(state, theta, state.from, state.to);
}

/** Fold the iteration's acceptance (state.iterationAcceptance, every block's) into the totals; adapt the kernel scales during search. */
export function concludeSimulationStep(state: SimulationState, exploring: boolean): void {
  const acc = state.iterationAcceptance;
  addAcceptance(state.totalAcceptance, acc);
  if (exploring) {
    // kappa <- kappa (1 + delta (acc - target)), likewise the component scales (DESIGN.md §5).
    state.kappa.accepted[0] = acc.randomWalkAccepted;
    state.kappa.tries[0] = acc.randomWalkTries;
    state.kappaAdaptation.update(state.kappa);
    state.subjectScale.accepted[0] = acc.adaptiveAccepted;
    state.subjectScale.tries[0] = acc.adaptiveTries;
    state.subjectAdaptation.update(state.subjectScale);
    state.componentScale.accepted.set(acc.componentAccepted);
    state.componentScale.tries.set(acc.componentTries);
    state.componentAdaptation.update(state.componentScale);
  }
}

/**
 * After an M-step the chains keep their phi; refresh the means, the components without BSV
 * (when the numerical block holds structural parameters) and the cached log-likelihoods.
 */
export function refreshChains(state: SimulationState, theta: PopulationParameters, structuralWithoutBsv: boolean): void {
  const { model, phiByChain, logLikByChain, meanPhiBySubject, predictionsByChain } = state;
  const p = model.nParams;
  const L = state.chains;
  refreshMeans(state, theta);
  for (let i = state.from; i < state.to; i++)
    for (let c = 0; c < L; c++) {
      const s = i * L + c;
      if (structuralWithoutBsv) {
        for (let j = 0; j < p; j++) if (model.parameters[j].etaIndex < 0) phiByChain[s * p + j] = meanPhiBySubject[i * p + j];
        const phi = phiByChain.subarray(s * p, s * p + p);
        logLikByChain[s] = model.predict(i, phi, predictionsByChain[s]) ? model.logLikFromPredictions(i, predictionsByChain[s], theta.a, theta.b) : -Infinity;
      } else logLikByChain[s] = model.logLikFromPredictions(i, predictionsByChain[s], theta.a, theta.b);
    }
}
