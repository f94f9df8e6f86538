/**
 * Estimator settings, read from the model spec's `estimation` block. Every key is optional;
 * unknown keys and bad values are errors naming their JSON path.
 *
 * Defaults (DESIGN.md §5; phase lengths common practice):
 * - seed: 1. The root of every random stream (the CLI's --seed overrides it).
 * - chains: "auto" = ceil(50 / N) chains per subject (at least 1, so N x chains >= 50), or an integer 1..100.
 * - explorationMinIterations: 150; explorationMaxIterations: 500. Exploration (step 1) ends
 *   automatically between the two once the trajectory has settled (see settleWindow,
 *   settleTolerance); with autoEndExploration false it runs explorationMaxIterations.
 * - averagingIterations: 200 (step 1/(k-K1)^stepExponent).
 * - stepExponent: 1 (plain averaging of every draw of phase 2); allowed (0.5, 1].
 * - independentSteps: 2, randomWalkSteps: 2, componentSweeps: 1 (Metropolis-Hastings steps per
 *   subject, chain and iteration: proposal from the population distribution, full random walk
 *   N(phi, kappa Omega), component-wise random walk).
 * - adaptiveSteps: 1 (random-walk steps shaped by each subject's own conditional covariance,
 *   learnt from its draws during exploration, then frozen; 0 turns the kernel off).
 * - targetAcceptance: 0.35 (random-walk kernels; their scales adapt during exploration, then freeze).
 * - annealingTau: 0.95 (variances fall at most 5 % per iteration during annealing).
 * - annealingIterations: null = the first half of explorationMinIterations (annealing inflates
 *   the draws; kept on through exploration it would bias the window that opens averaging).
 * - settleWindow: 50 iterations; settleTolerance: 0.5 (exploration has settled when, for every
 *   estimate on its working scale, the means of the last two windows differ by less than
 *   settleTolerance x their mean within-window SD).
 * - individualDraws: 50 (the last iterations averaged, over every chain, for the individual estimates).
 * - iterateAveraging: false. When true, the estimate reported is the mean of the iterates over
 *   the second half of the averaging phase (Polyak-Ruppert averaging; Polyak & Juditsky 1992,
 *   from memory): with stepExponent < 1 it keeps the 1/sqrt(K) rate when much information is
 *   missing (weakly identified variances), where plain 1/k steps converge slowly.
 */
import { SpecError } from '../spec/modelSpec.js';

export interface SaemSettings {
  seed: number;
  chains: number | 'auto';
  explorationMinIterations: number;
  explorationMaxIterations: number;
  autoEndExploration: boolean;
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
}

export const DEFAULT_SAEM_SETTINGS: Readonly<SaemSettings> = Object.freeze({
  seed: 1,
  chains: 'auto',
  explorationMinIterations: 150,
  explorationMaxIterations: 500,
  autoEndExploration: true,
  averagingIterations: 200,
  stepExponent: 1,
  independentSteps: 2,
  randomWalkSteps: 2,
  componentSweeps: 1,
  adaptiveSteps: 1,
  targetAcceptance: 0.35,
  annealingTau: 0.95,
  annealingIterations: null,
  settleWindow: 50,
  settleTolerance: 0.5,
  individualDraws: 50,
  iterateAveraging: false,
});

type Check = (v: unknown) => string | null;
const int = (lo: number, hi: number): Check => (v) => (typeof v === 'number' && Number.isInteger(v) && v >= lo && v <= hi ? null : `must be an integer in [${lo}, ${hi}]`);
const num = (lo: number, hi: number, openLo = false): Check => (v) =>
  typeof v === 'number' && Number.isFinite(v) && (openLo ? v > lo : v >= lo) && v <= hi ? null : `must be a number in ${openLo ? '(' : '['}${lo}, ${hi}]`;
const bool: Check = (v) => (typeof v === 'boolean' ? null : 'must be true or false');

const CHECKS: Record<keyof SaemSettings, Check> = {
  seed: int(0, 2 ** 53 - 1),
  chains: (v) => (v === 'auto' ? null : int(1, 100)(v) && 'must be "auto" or an integer in [1, 100]'),
  explorationMinIterations: int(0, 100_000),
  explorationMaxIterations: int(1, 100_000),
  autoEndExploration: bool,
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
  if (out.explorationMinIterations > out.explorationMaxIterations)
    problems.push(`estimation.explorationMinIterations: ${out.explorationMinIterations} exceeds explorationMaxIterations ${out.explorationMaxIterations}`);
  if (out.independentSteps + out.randomWalkSteps + out.componentSweeps === 0)
    problems.push('estimation: at least one Metropolis-Hastings step per iteration is needed (independentSteps, randomWalkSteps, componentSweeps)');
  if (problems.length) throw new SpecError(problems);
  return out;
}

/** Chains per subject for N subjects. */
export function resolveChains(settings: SaemSettings, nSubjects: number): number {
  return settings.chains === 'auto' ? Math.max(1, Math.ceil(50 / Math.max(1, nSubjects))) : settings.chains;
}
