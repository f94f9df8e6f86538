/**
 * Estimator settings, read from the model spec's `estimation` block. Every key is optional;
 * unknown keys and bad values are errors naming their JSON path.
 *
 * The estimator has two phases of our own naming: the search phase (step size 1: the estimates
 * move freely towards the region of the maximum) and the averaging phase (step 1/k: the
 * stochastic approximation averages out the simulation noise).
 *
 * Defaults, chosen on the every-seed checks against exact quadrature MLEs on sparse TDM data
 * (tests/integration/fit/sparseSeeds.test.ts; nlme's Phenobarb and a simulated sparse 2-cmt
 * design) and on Theoph (rich data):
 * - seed: 1. The root of every random stream (the CLI's --seed overrides it).
 * - chains: "auto" = max(4, ceil(50 / N)) chains per subject, or an integer 1..100. Why 4 at
 *   least: on sparse data most of the information about a BSV is missing (the search-phase
 *   trajectory of log BSV has lag-1 autocorrelation 0.91 on Phenobarb, 0.98 for V1 on the sparse
 *   design), so the estimate at the end of the search phase wanders with an SD that depends on
 *   the chains per subject, not on N (both the noise and the SE scale as 1/sqrt(N)); with one
 *   chain it was about 0.2 on the log scale, comparable to the SE itself, and the 1/k averaging
 *   forgets its starting point only like k^-(1 - 0.91). Four chains halve that wander; with them
 *   every seed lands within 0.5 SE of the exact MLE (one chain: BSV of V1 collapsed in 4 of 5
 *   seeds on the sparse design; Phenobarb's BSV of CL 0.6-0.8 SE low in 3 of 5 seeds).
 * - searchMinIterations: 300; searchMaxIterations: 600. The search phase ends automatically
 *   between the two once the trajectory has settled (see settleWindow, settleTolerance); with
 *   autoEndSearch false it runs searchMaxIterations.
 * - averagingIterations: 200 (step 1/(k-K1)^stepExponent). Longer averaging did not help (600
 *   iterations moved a collapsed BSV by nothing): the bias came from where the phase started.
 * - stepExponent: 1 (plain averaging of every draw of the averaging phase); allowed (0.5, 1].
 * - independentSteps: 2, randomWalkSteps: 2, componentSweeps: 1 (Metropolis-Hastings steps per
 *   subject, chain and iteration: proposal from the population distribution, full random walk
 *   N(phi, kappa Omega), component-wise random walk). Measured acceptance on the sparse data is
 *   0.24-0.39 for every kernel: the chains mix given Omega, so more steps were not the remedy.
 * - adaptiveSteps: 1 (random-walk steps shaped by each subject's own conditional covariance,
 *   learnt from its draws during the search phase, then frozen; 0 turns the kernel off).
 * - targetAcceptance: 0.35 (random-walk kernels; their scales adapt during the search phase, then freeze).
 * - annealingTau: 0.95 (variances fall at most 5 % per iteration during annealing).
 * - annealingIterations: 75 (null = the first half of searchMinIterations). Annealing held
 *   through the whole search phase biased Phenobarb's BSV of CL upward (0.25 against the exact
 *   0.214, 0.8 SE, in 3 of 5 seeds), so it stays short.
 * - settleWindow: 150 iterations (at most half of searchMinIterations, at least 5); settleTolerance:
 *   0.5 (the search has settled when, for every
 *   estimate on its working scale, the means of the last two windows differ by less than
 *   settleTolerance x their mean within-window SD). The last window's mean statistics open the
 *   averaging phase: with autocorrelation 0.9-0.98 a 50-iteration window holds only 1-3
 *   independent draws, so its mean was nearly one noisy iterate (and two such windows pass the
 *   settle test while the trajectory still drifts); 150 iterations fixed the remaining miss on
 *   the sparse design (Q 7.6 L/h and BSV V1 0.30 against 6.05 and 0.247 exact with window 50).
 * - individualDraws: 50 (the last iterations averaged, over every chain, for the individual estimates).
 * - iterateAveraging: false. When true, the estimate reported is the mean of the iterates over
 *   the second half of the averaging phase (Polyak-Ruppert averaging; Polyak & Juditsky 1992,
 *   from memory).
 * - seeds: 3 (1..16). A fit runs this many seeds (the seed and the next ones), compares them and
 *   keeps the one with the best importance-sampling -2LL (main/services/fitSeeds.ts); 1 turns
 *   the check off. The estimator itself runs one seed.
 */
import { SpecError } from '../spec/modelSpec.js';

export interface SaemSettings {
  seed: number;
  chains: number | 'auto';
  searchMinIterations: number;
  searchMaxIterations: number;
  autoEndSearch: boolean;
  averagingIterations: number;
  stepExponent: number;
  independentSteps: number;
  randomWalkSteps: number;
  componentSweeps: number;
  adaptiveSteps: number;
  targetAcceptance: number;
  annealingTau: number;
  annealingIterations: number | null;
  settleWindow: number;
  settleTolerance: number;
  individualDraws: number;
  iterateAveraging: boolean;
  seeds: number;
}

export const DEFAULT_SAEM_SETTINGS: Readonly<SaemSettings> = Object.freeze({
  seed: 1,
  chains: 'auto',
  searchMinIterations: 300,
  searchMaxIterations: 600,
  autoEndSearch: true,
  averagingIterations: 200,
  stepExponent: 1,
  independentSteps: 2,
  randomWalkSteps: 2,
  componentSweeps: 1,
  adaptiveSteps: 1,
  targetAcceptance: 0.35,
  annealingTau: 0.95,
  annealingIterations: 75,
  settleWindow: 150,
  settleTolerance: 0.5,
  individualDraws: 50,
  iterateAveraging: false,
  seeds: 3,
});

type Check = (v: unknown) => string | null;
const int = (lo: number, hi: number): Check => (v) => (typeof v === 'number' && Number.isInteger(v) && v >= lo && v <= hi ? null : `must be an integer in [${lo}, ${hi}]`);
const num = (lo: number, hi: number, openLo = false): Check => (v) =>
  typeof v === 'number' && Number.isFinite(v) && (openLo ? v > lo : v >= lo) && v <= hi ? null : `must be a number in ${openLo ? '(' : '['}${lo}, ${hi}]`;
const bool: Check = (v) => (typeof v === 'boolean' ? null : 'must be true or false');

const CHECKS: Record<keyof SaemSettings, Check> = {
  seed: int(0, 2 ** 53 - 1),
  chains: (v) => (v === 'auto' ? null : int(1, 100)(v) && 'must be "auto" or an integer in [1, 100]'),
  searchMinIterations: int(0, 100_000),
  searchMaxIterations: int(1, 100_000),
  autoEndSearch: bool,
  averagingIterations: int(1, 100_000),
  stepExponent: num(0.5, 1, true),
  independentSteps: int(0, 50),
  randomWalkSteps: int(0, 50),
  componentSweeps: int(0, 50),
  adaptiveSteps: int(0, 50),
  targetAcceptance: num(0.05, 0.95),
  annealingTau: num(0, 1, true),
  annealingIterations: (v) => (v === null ? null : int(0, 100_000)(v) && 'must be null or an integer >= 0'),
  settleWindow: int(5, 10_000),
  settleTolerance: num(0, 100, true),
  individualDraws: int(1, 100_000),
  iterateAveraging: bool,
  seeds: int(1, 16),
};

/** Validate `estimation` and fill the defaults. Throws SpecError with `estimation.<key>` paths. */
export function parseSaemSettings(estimation: Readonly<Record<string, unknown>> = {}, overrides: Partial<SaemSettings> = {}): SaemSettings {
  const problems: string[] = [];
  const out: SaemSettings = { ...DEFAULT_SAEM_SETTINGS };
  const apply = (source: Readonly<Record<string, unknown>>, prefix: string) => {
    for (const [key, value] of Object.entries(source)) {
      if (!Object.prototype.hasOwnProperty.call(CHECKS, key)) {
        problems.push(`${prefix}${key}: unknown estimator setting (known: ${Object.keys(CHECKS).join(', ')})`);
        continue;
      }
      if (value === undefined) continue;
      const err = CHECKS[key as keyof SaemSettings](value);
      if (err) problems.push(`${prefix}${key}: ${err}, got ${JSON.stringify(value)}`);
      else (out as unknown as Record<string, unknown>)[key] = value;
    }
  };
  apply(estimation, 'estimation.');
  apply(overrides as Record<string, unknown>, 'setting ');
  if (out.searchMinIterations > out.searchMaxIterations)
    problems.push(`estimation.searchMinIterations: ${out.searchMinIterations} exceeds searchMaxIterations ${out.searchMaxIterations}`);
  if (out.independentSteps + out.randomWalkSteps + out.componentSweeps === 0)
    problems.push('estimation: at least one Metropolis-Hastings step per iteration is needed (independentSteps, randomWalkSteps, componentSweeps)');
  if (problems.length) throw new SpecError(problems);
  return out;
}

/** Chains per subject for N subjects. */
export function resolveChains(settings: SaemSettings, nSubjects: number): number {
  return settings.chains === 'auto' ? Math.max(4, Math.ceil(50 / Math.max(1, nSubjects))) : settings.chains;
}
