/**
 * Several seeds, one verdict: the fits of one model to one dataset from different random seeds
 * are compared estimate by estimate (range across seeds relative to the estimate's SE) and by
 * their importance-sampling -2LL; the fit with the lowest -2LL is kept. Pure logic: the fits
 * themselves are run by the caller (main/services/fitSeeds.ts), in process or in workers.
 *
 * Rule (ours, from the sparse-data checks): the seeds agree when every estimate's range across
 * seeds is at most AGREE_SE_FRACTION of its SE (each seed then lies within that much of the
 * others, as the every-seed checks against exact MLEs demand 0.5 SE from the optimum) and the
 * -2LL range is at most max(AGREE_MINUS2LL, 3 x the combined Monte Carlo error).
 */

/** Largest range across seeds, in SEs, for an estimate to count as agreeing. */
export const AGREE_SE_FRACTION = 1;
/** Largest -2LL range across seeds that counts as agreeing (plus Monte Carlo error). */
export const AGREE_MINUS2LL = 1;

export interface SeedFitSummary {
  seed: number;
  /** Estimates in the order of `labels` (NaN where not finite). */
  estimates: readonly number[];
  /** Importance-sampling -2LL, null when it could not be computed. */
  minus2LL: number | null;
  mcError: number | null;
  /** false when the fit's own checks say it degenerated. */
  usableAsPrior: boolean;
}

export interface EstimateAgreement {
  label: string;
  /** max - min across seeds. */
  range: number;
  /** SE of the kept fit; null when none. */
  se: number | null;
  /** range / se; null without an SE. */
  rangeInSe: number | null;
  agree: boolean | null;
}

export interface SeedAgreement {
  seeds: number[];
  /** Seed of the fit kept (lowest finite -2LL among the usable fits, else among all). */
  keptSeed: number;
  keptReason: string;
  agree: boolean;
  /** Labels of the estimates whose seeds disagree (and "-2LL" when the likelihoods do). */
  disagreeing: string[];
  estimates: EstimateAgreement[];
  minus2LL: { values: (number | null)[]; range: number | null; tolerance: number | null; agree: boolean | null };
  verdict: string;
  rule: string;
}

export function keptIndex(runs: readonly SeedFitSummary[]): number {
  let best = -1;
  const better = (i: number) =>
    best < 0 ||
    (runs[i].usableAsPrior && !runs[best].usableAsPrior) ||
    (runs[i].usableAsPrior === runs[best].usableAsPrior && (runs[i].minus2LL ?? Infinity) < (runs[best].minus2LL ?? Infinity));
  for (let i = 0; i < runs.length; i++) if (better(i)) best = i;
  return best;
}

/** Compare the seeds; `se` are the kept fit's SEs in the order of `labels`. */
export function seedAgreement(labels: readonly string[], runs: readonly SeedFitSummary[], se: readonly (number | null)[]): SeedAgreement {
  if (runs.length === 0) throw new RangeError('seedAgreement needs at least one fit');
  const k = keptIndex(runs);
  const kept = runs[k];
  const estimates: EstimateAgreement[] = labels.map((label, q) => {
    const xs = runs.map((r) => r.estimates[q]);
    const finite = xs.every(Number.isFinite);
    const range = finite ? Math.max(...xs) - Math.min(...xs) : NaN;
    const s = se[q];
    const rangeInSe = s !== null && s > 0 && Number.isFinite(range) ? range / s : null;
    return { label, range, se: s ?? null, rangeInSe, agree: !finite ? false : rangeInSe === null ? (range === 0 ? true : null) : rangeInSe <= AGREE_SE_FRACTION };
  });
  const m2 = runs.map((r) => (r.minus2LL !== null && Number.isFinite(r.minus2LL) ? r.minus2LL : null));
  const finiteM2 = m2.filter((x): x is number => x !== null);
  const m2Range = finiteM2.length === runs.length && runs.length > 0 ? Math.max(...finiteM2) - Math.min(...finiteM2) : null;
  const mc = Math.sqrt(runs.reduce((s, r) => s + (r.mcError !== null && Number.isFinite(r.mcError) ? r.mcError * r.mcError : 0), 0));
  const tolerance = Math.max(AGREE_MINUS2LL, 3 * mc);
  const m2Agree = m2Range === null ? null : m2Range <= tolerance;
  const disagreeing = estimates.filter((e) => e.agree === false).map((e) => e.label);
  if (m2Agree === false) disagreeing.push('-2LL');
  const unknown = estimates.filter((e) => e.agree === null).map((e) => e.label);
  const agree = runs.length === 1 ? true : disagreeing.length === 0;
  const keptReason = runs.length === 1 ? 'the only seed run' : kept.minus2LL !== null ? `lowest importance-sampling -2LL (${kept.minus2LL.toFixed(2)}) of ${runs.length} seeds${kept.usableAsPrior ? '' : '; every seed degenerated'}` : `no seed has a finite -2LL; the first usable fit is kept`;
  const verdict =
    runs.length === 1
      ? 'one seed only: agreement between seeds not checked'
      : agree
        ? `the ${runs.length} seeds agree${unknown.length ? ` (no SE to judge ${unknown.join(', ')})` : ''}`
        : `the ${runs.length} seeds DISAGREE on ${disagreeing.join(', ')}: the estimate depends on the seed; do not rely on it without checking the model and its data`;
  return {
    seeds: runs.map((r) => r.seed),
    keptSeed: kept.seed,
    keptReason,
    agree,
    disagreeing,
    estimates,
    minus2LL: { values: m2, range: m2Range, tolerance: m2Range === null ? null : tolerance, agree: m2Agree },
    verdict,
    rule: `seeds agree when every estimate's range across seeds is at most ${AGREE_SE_FRACTION} SE and the -2LL range at most max(${AGREE_MINUS2LL}, 3 x Monte Carlo error)`,
  };
}
