/**
 * SAEM with MCMC (Delyon, Lavielle & Moulines 1999; Kuhn & Lavielle 2004, 2005; censored
 * levels: Samson, Lavielle & Mentre 2006; all from memory), DESIGN.md §5.
 *
 * Each iteration k: (1) for every subject and chain, Metropolis-Hastings steps on phi_i
 * targeting p(phi_i | y_i; theta_k): independent proposal from the population distribution,
 * full random walk N(phi, kappa Omega), component-wise random walk with adaptive scales, and a
 * random walk shaped by the subject's own conditional covariance (learnt from its draws during the
 * search; it mixes along ridges of p(phi_i | y_i) that Omega-shaped steps cross slowly);
 * scales adapt towards the target acceptance during the search phase, then freeze (the kernels and
 * the adaptation rule are the shared ones of engine/mcmc, over eta_i = phi_i - mean_i).
 * Censored levels are then drawn from their truncated conditional distribution. (2) Stochastic approximation of
 * the complete-data sufficient statistics, s_k = s_{k-1} + gamma_k (S_k - s_{k-1}): gamma 1 in
 * search, then 1/(k - K1 + W)^alpha, the averaging phase opening from the mean statistics
 * of the last W (settle window) search iterations. (3) M-step: typical values and
 * covariate effects of parameters with BSV by GLS from s_k with W = Omega_{k-1}^-1 (least
 * squares under a diagonal Omega or shared regressors), Omega from the second moments within
 * the chosen blocks, additive / proportional / log-additive residual variance in closed form.
 * Parameters without BSV and combined-error (a, b) have no sufficient statistics: they move by a
 * stochastic-approximation Newton step on the complete-data log-likelihood at the current
 * draws, theta <- theta - gamma Hbar^-1 grad (Robbins-Monro; by Fisher's identity its fixed
 * point solves the observed-data score equation, so it lands on the MLE: checked against an
 * exact quadrature MLE in tests/integration/fit/censoredExact.test.ts). Variances are annealed
 * early in the search phase (at most (1 - tau) fall per iteration). Randomness: one stream per
 * subject and chain from the seed, so results do not depend on the order of work.
 *
 * Layout: engine/saem/simulation.ts holds step (1) and the chain refresh, engine/saem/mStep.ts the
 * sufficient statistics and the closed-form M-step, engine/saem/layout.ts the estimate order and
 * engine/saem/schedules.ts the step size (with the phase switch) and the annealing as
 * init / update / final records, and the settle test, engine/saem/newtonStep.ts the stochastic
 * Newton step of the numerical block (finite differences from engine/optim), engine/saem/settleWindow.ts
 * the window that opens the averaging phase; this file drives the iterations: iterate averaging,
 * individual means, result.
 *
 * The iteration itself is synchronous and allocation-free; `runSaem` drives it, reports progress
 * every iteration and checks the abort signal between iterations. A host that must receive an
 * abort message while the fit runs returns a promise from onProgress (e.g. every 10
 * iterations) so its event loop can turn.
 */
import type { CompiledModel, PopulationParameters } from '../stats/model.js';
import { estimateNamesOf, positiveEstimates, writeEstimates as writeEstimatesOf } from './layout.js';
import { annealingSchedule, effectiveSettleWindow, settledAt, stepSizeSchedule } from './schedules.js';
import { parseSaemSettings, resolveChains, type SaemSettings } from './settings.js';
import { approximateStatistics, closedFormMStep, computeStatistics, createMStepState } from './mStep.js';
import { createNewtonStep } from './newtonStep.js';
import { createSettleWindowStore, openFromWindowMeans, storeWindowNewton, storeWindowStatistics } from './settleWindow.js';
import { createOmegaFactor, refreshOmegaFactor } from './simulation.js';
import { createSubjectBlocks, type SaemThreadHost } from './threads.js';

export type SaemPhase = 'search' | 'averaging';

/** Something with `aborted` (an AbortSignal); the engine has no DOM or Node types. */
export interface AbortSignalLike {
  readonly aborted: boolean;
}

export interface SaemProgress {
  phase: SaemPhase;
  /** 1-based iteration just completed. */
  iteration: number;
  /** Last search iteration once known, else null. */
  searchEnd: number | null;
  /** Planned total iterations (search end may move it while still exploring). */
  plannedIterations: number;
  /** Current estimates, named by `estimateNames` (valid during the callback only). */
  estimates: Float64Array;
  estimateNames: readonly string[];
}

export interface SaemOptions {
  /** Overrides the settings' seed. */
  seed?: number;
  /** Setting overrides (applied over the spec's estimation block). */
  settings?: Partial<SaemSettings>;
  /** Called after every iteration; a returned promise is awaited (a chance to yield). */
  onProgress?: (progress: SaemProgress) => void | Promise<void>;
  signal?: AbortSignalLike;
  /** Milliseconds clock for timing (default Date.now). */
  now?: () => number;
  /**
   * Hands control back to the host (e.g. `setImmediate` in Node) at most every
   * `yieldEveryMs` ms of work, so an abort from outside can land mid-fit; the engine itself
   * knows no event loop.
   */
  yieldToHost?: () => Promise<void>;
  /** Default 50 ms. */
  yieldEveryMs?: number;
  /**
   * Runs the per-subject work on more threads (engine/saem/threads.ts); results are the same to
   * the last bit for any number of threads. Without it, or for a model with its own structural
   * function, the fit runs on the calling thread.
   */
  threads?: SaemThreadHost;
  /**
   * Keep the population parameters at their initial values (no M-step): the kernels then sample
   * p(phi_i | y_i; theta) at that theta (for checks of the sampler and for post-fit draws).
   */
  freezePopulation?: boolean;
}

export interface SaemResult {
  settings: SaemSettings;
  seed: number;
  chains: number;
  /** Final population parameters (mu, beta transformed scale). */
  theta: PopulationParameters;
  /** Names of the trajectory columns: typical values (natural scale), covariate coefficients, BSV SDs, correlations, residual. */
  estimateNames: readonly string[];
  /** Final estimates named by estimateNames (natural scale for typical values, SDs for BSV). */
  estimates: Float64Array;
  /** iterations x estimateNames.length, row-major. */
  trajectory: Float64Array;
  iterations: number;
  /** Last search iteration (1-based). */
  searchEnd: number;
  /** Whether search ended by the settle test (false: it hit its cap). */
  searchSettled: boolean;
  /** Per subject (row) and parameter (column, spec order), natural scale: mean over the last draws of every chain. */
  individualMean: Float64Array;
  /** Same, transformed scale. */
  individualPhiMean: Float64Array;
  acceptance: { independent: number; randomWalk: number; component: Float64Array; adaptive: number };
  warnings: string[];
  timingMs: { total: number; search: number; averaging: number };
}

export class SaemCancelledError extends Error {
  constructor(iteration: number) {
    super(`the fit was cancelled at iteration ${iteration}`);
    this.name = 'AbortError';
  }
}

export { estimateNamesOf, RESIDUAL_COLUMN, residualKeyOf } from './layout.js';

/** A prepared SAEM run: `step()` performs one iteration; the caller decides when to stop. */
export interface SaemRun {
  readonly settings: SaemSettings;
  readonly estimateNames: readonly string[];
  step(): void;
  readonly done: boolean;
  readonly iteration: number;
  readonly phase: SaemPhase;
  readonly searchEnd: number | null;
  readonly plannedIterations: number;
  readonly current: Float64Array;
  /** Threads the run uses (1: the calling thread alone). */
  readonly threads: number;
  /** Resolves when the run's threads are ready; step() only after it. */
  readonly ready: Promise<void>;
  finish(): SaemResult;
  /** Stop the run's threads (idempotent; finish() calls it). */
  close(): void;
}

export function createSaemRun(model: CompiledModel, options: SaemOptions = {}): SaemRun {
  const settings = parseSaemSettings(model.spec.estimation, { ...(options.settings ?? {}), ...(options.seed !== undefined ? { seed: options.seed } : {}) });
  const now = options.now ?? Date.now;
  const tStart = now();
  const nSubjects = model.nSubjects;
  const nParams = model.nParams;
  const nRandomEffects = model.nEta;
  const nCovariateTerms = model.covariateTerms.length;
  // Columns of the design row of a parameter with BSV: intercept and covariate terms.
  const designWidth = 1 + nCovariateTerms;
  const nChains = resolveChains(settings, nSubjects);
  const nChainsTotal = nSubjects * nChains;
  const residualModel = model.residualModel;
  const warnings: string[] = [...model.warnings];
  const estimateNames = estimateNamesOf(model);
  const nEst = estimateNames.length;
  const maxIter = settings.searchMaxIterations + settings.averagingIterations;

  // Population parameters, working copy.
  const theta: PopulationParameters = {
    mu: Float64Array.from(model.initial.mu),
    beta: Float64Array.from(model.initial.beta),
    omega: Float64Array.from(model.initial.omega),
    a: model.initial.a,
    b: model.initial.b,
  };

  // Omega factor: Cholesky (for proposals), inverse (for the prior).
  const omegaFactor = createOmegaFactor(nRandomEffects);
  refreshOmegaFactor(omegaFactor, theta.omega);

  // Design rows, GLS layout and sufficient statistics of the M-step (engine/saem/mStep.ts).
  const mStepState = createMStepState(model, settings);
  const stats = mStepState.statistics;

  // Chains, kernels and their adaptation (engine/saem/simulation.ts), over subject blocks on one
  // or more threads (engine/saem/threads.ts).
  const blocks = createSubjectBlocks(model, settings, nChains, theta, omegaFactor, warnings, options.threads);
  const sim = blocks.sim;
  // Numerical block, moved by the stochastic Newton step (engine/saem/newtonStep.ts): typical
  // values / coefficients of parameters without BSV, combined-error (log a, log b).
  const newton = createNewtonStep(model, theta, sim, blocks.newtonBatch, () => blocks.evaluateNewton(theta));
  const newtonComponents = newton.components;
  const newtonHasStructural = newton.structural;
  const nNewton = newtonComponents.length;

  const trajectory = new Float64Array(maxIter * nEst);
  const current = new Float64Array(nEst);
  const individualNaturalSum = new Float64Array(nSubjects * nParams);
  const individualPhiSum = new Float64Array(nSubjects * nParams);
  const naturalScratch = new Float64Array(nParams);
  let individualDrawCount = 0;

  // Schedules (engine/saem/schedules.ts): the step size gamma_k with its phase switch, and the
  // annealing that keeps variances from falling too fast early in the search. The run's phase is
  // the step-size schedule's: searchEnd is null while the search runs.
  const stepSchedule = stepSizeSchedule.init(settings);
  const annealing = annealingSchedule.init(settings);

  function mStep(gamma: number): void {
    approximateStatistics(mStepState, gamma);
    closedFormMStep(mStepState, theta, omegaFactor, annealing.active ? annealing : null);
    if (nNewton > 0) {
      const aBeforeNewton = theta.a;
      const bBeforeNewton = theta.b;
      newton.step(gamma);
      if (residualModel === 'combined') annealingSchedule.holdCombinedError(annealing, theta, aBeforeNewton, bBeforeNewton);
    }
    refreshChains();
  }

  const refreshChains = (): void => blocks.refresh(theta, newtonHasStructural);

  const writeEstimates = (out: Float64Array): void => writeEstimatesOf(model, theta, out);
  /** Working scale of each estimate for the settle test: log of positive quantities. */
  const positive = positiveEstimates(model, estimateNames);
  const settleWindow = effectiveSettleWindow(settings.settleWindow, settings.searchMinIterations);
  const settled = (k: number): boolean => settledAt(k, trajectory, nEst, positive, settleWindow, settings.settleTolerance);

  // The last settleWindow search iterations (judged stationary by the settle test) open the
  // averaging phase from their means (engine/saem/settleWindow.ts).
  const windowStore = createSettleWindowStore(settleWindow, designWidth, nRandomEffects, nNewton);
  /** Opens the averaging phase at iteration k; returns the number of window iterations it used. */
  function warmStart(k: number): number {
    const warmCount = openFromWindowMeans(windowStore, stats, newtonComponents, theta, k);
    // M-step from the window means (gamma 0 keeps the statistics as set).
    closedFormMStep(mStepState, theta, omegaFactor, null);
    refreshChains();
    writeEstimates(current);
    trajectory.set(current, (k - 1) * nEst);
    return warmCount;
  }

  const averagedMu = new Float64Array(nParams);
  const averagedBeta = new Float64Array(nCovariateTerms);
  const averagedOmega = new Float64Array(nRandomEffects * nRandomEffects);
  let averagedA = 0, averagedB = 0, averagedCount = 0;

  let iteration = 0;
  let searchSettled = false;
  let tSearchEnd = tStart;

  const run: SaemRun = {
    settings,
    estimateNames,
    get done() {
      return stepSchedule.searchEnd !== null && iteration >= stepSchedule.searchEnd + settings.averagingIterations;
    },
    get iteration() {
      return iteration;
    },
    get phase(): SaemPhase {
      return stepSchedule.searchEnd === null ? 'search' : 'averaging';
    },
    get searchEnd() {
      return stepSchedule.searchEnd;
    },
    get plannedIterations() {
      return (stepSchedule.searchEnd ?? settings.searchMaxIterations) + settings.averagingIterations;
    },
    current,
    threads: blocks.threads,
    ready: blocks.ready,
    close: () => blocks.close(),
    step() {
      if (this.done) return;
      const exploring = stepSchedule.searchEnd === null;
      iteration++;
      blocks.simulate(theta, exploring);
      computeStatistics(mStepState, sim);
      if (exploring) storeWindowStatistics(windowStore, stats, iteration);
      const gamma = stepSizeSchedule.update(stepSchedule, iteration);
      annealingSchedule.update(annealing, iteration, exploring);
      if (!options.freezePopulation) mStep(gamma);
      if (exploring) storeWindowNewton(windowStore, newtonComponents, theta, iteration);
      writeEstimates(current);
      trajectory.set(current, (iteration - 1) * nEst);
      if (!exploring) {
        if (settings.iterateAveraging && iteration > stepSchedule.searchEnd! + Math.floor(settings.averagingIterations / 2)) {
          for (let j = 0; j < nParams; j++) averagedMu[j] += theta.mu[j];
          for (let t = 0; t < nCovariateTerms; t++) averagedBeta[t] += theta.beta[t];
          for (let q = 0; q < nRandomEffects * nRandomEffects; q++) averagedOmega[q] += theta.omega[q];
          averagedA += theta.a;
          averagedB += theta.b;
          averagedCount++;
        }
        const lastStart = stepSchedule.searchEnd! + settings.averagingIterations - Math.min(settings.individualDraws, settings.averagingIterations);
        if (iteration > lastStart) {
          for (let s = 0; s < nChainsTotal; s++) {
            const i = (s / nChains) | 0;
            const phi = sim.phiByChain.subarray(s * nParams, s * nParams + nParams);
            model.toNatural(phi, naturalScratch);
            for (let j = 0; j < nParams; j++) {
              individualNaturalSum[i * nParams + j] += naturalScratch[j];
              individualPhiSum[i * nParams + j] += phi[j];
            }
          }
          individualDrawCount += nChains;
        }
      } else {
        if (settings.autoEndSearch && iteration >= settings.searchMinIterations && settled(iteration)) searchSettled = true;
        if (searchSettled || iteration >= settings.searchMaxIterations) {
          const warmCount = options.freezePopulation ? 0 : warmStart(iteration);
          stepSizeSchedule.final(stepSchedule, iteration, warmCount);
          annealingSchedule.final(annealing);
          tSearchEnd = now();
        }
      }
    },
    finish(): SaemResult {
      blocks.close();
      const tEnd = now();
      const count = Math.max(1, individualDrawCount / nChains);
      const individualMean = new Float64Array(nSubjects * nParams);
      const individualPhiMean = new Float64Array(nSubjects * nParams);
      for (let q = 0; q < nSubjects * nParams; q++) {
        individualMean[q] = individualNaturalSum[q] / (count * nChains);
        individualPhiMean[q] = individualPhiSum[q] / (count * nChains);
      }
      if (stepSchedule.searchEnd !== null && !searchSettled && settings.autoEndSearch)
        warnings.push(`search reached its cap of ${settings.searchMaxIterations} iterations before the trajectory settled; check the convergence plot or raise estimation.searchMaxIterations`);
      if (mStepState.omegaFailures > 0) warnings.push(`Omega lost positive definiteness in ${mStepState.omegaFailures} iteration(s); the previous Omega was kept there`);
      if (averagedCount > 0) {
        for (let j = 0; j < nParams; j++) theta.mu[j] = averagedMu[j] / averagedCount;
        for (let t = 0; t < nCovariateTerms; t++) theta.beta[t] = averagedBeta[t] / averagedCount;
        for (let q = 0; q < nRandomEffects * nRandomEffects; q++) theta.omega[q] = averagedOmega[q] / averagedCount;
        theta.a = averagedA / averagedCount;
        theta.b = averagedB / averagedCount;
      }
      const estimates = new Float64Array(nEst);
      writeEstimates(estimates);
      const total = sim.totalAcceptance;
      const compAcc = new Float64Array(nRandomEffects);
      for (let k = 0; k < nRandomEffects; k++) compAcc[k] = total.componentTries[k] > 0 ? total.componentAccepted[k] / total.componentTries[k] : NaN;
      for (let q = 0; q < nEst; q++)
        if (!Number.isFinite(estimates[q])) warnings.push(`estimate ${estimateNames[q]} is not a finite number: the fit failed; check the initial values and the data`);
      return {
        settings,
        seed: settings.seed,
        chains: nChains,
        theta: { mu: Float64Array.from(theta.mu), beta: Float64Array.from(theta.beta), omega: Float64Array.from(theta.omega), a: theta.a, b: theta.b },
        estimateNames,
        estimates,
        trajectory: trajectory.slice(0, iteration * nEst),
        iterations: iteration,
        searchEnd: stepSchedule.searchEnd ?? iteration,
        searchSettled,
        individualMean,
        individualPhiMean,
        acceptance: {
          independent: total.independentTries > 0 ? total.independentAccepted / total.independentTries : NaN,
          randomWalk: total.randomWalkTries > 0 ? total.randomWalkAccepted / total.randomWalkTries : NaN,
          component: compAcc,
          adaptive: total.adaptiveTries > 0 ? total.adaptiveAccepted / total.adaptiveTries : NaN,
        },
        warnings,
        timingMs: { total: tEnd - tStart, search: tSearchEnd - tStart, averaging: tEnd - tSearchEnd },
      };
    },
  };
  return run;
}

/** Run SAEM to the end; rejects with SaemCancelledError when the signal aborts. */
export async function runSaem(model: CompiledModel, options: SaemOptions = {}): Promise<SaemResult> {
  const run = createSaemRun(model, options);
  try {
    await run.ready;
    return await driveRun(run, options);
  } finally {
    run.close();
  }
}

async function driveRun(run: SaemRun, options: SaemOptions): Promise<SaemResult> {
  const now = options.now ?? Date.now;
  const yieldEveryMs = options.yieldEveryMs ?? 50;
  let lastYield = now();
  while (!run.done) {
    if (options.signal?.aborted) throw new SaemCancelledError(run.iteration);
    run.step();
    if (options.yieldToHost && now() - lastYield >= yieldEveryMs) {
      await options.yieldToHost();
      lastYield = now();
    }
    if (options.onProgress) {
      const r = options.onProgress({
        phase: run.phase === 'averaging' && run.iteration === run.searchEnd ? 'search' : run.phase,
        iteration: run.iteration,
        searchEnd: run.searchEnd,
        plannedIterations: run.plannedIterations,
        estimates: run.current,
        estimateNames: run.estimateNames,
      });
      if (r && typeof (r as Promise<void>).then === 'function') await r;
    }
  }
  if (options.signal?.aborted) throw new SaemCancelledError(run.iteration);
  return run.finish();
}
