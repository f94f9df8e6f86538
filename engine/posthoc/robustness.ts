/**
 * Robustness check: the same fit repeated from K seeds, each run after the first from initial
 * values jittered on the log scale (typical values of log-transformed parameters, BSV SDs and
 * residual terms multiplied by exp(jitter z), z ~ N(0, 1); other values shifted by jitter z),
 * compared with the first run. Verdict (our rule, stated in the output): a parameter is unstable
 * when the range of its estimates across runs exceeds its SE; -2LL is unstable when its range
 * exceeds max(1, 4 x its Monte Carlo error).
 */
import type { Dataset } from '../data/types.js';
import { createStreams } from '../rng/index.js';
import { runSaem, type SaemOptions } from '../saem/saem.js';
import type { SaemSettings } from '../saem/settings.js';
import type { ModelSpec, ParameterSpec } from '../spec/modelSpec.js';
import { compileModel, type CompiledModel } from '../stats/model.js';
import { runPosthoc } from './index.js';
import { naturalOf, parameterLayout, toWorking } from './parameters.js';

export interface RepeatOptions {
  runs: number;
  /** Seed of the first run; run r uses seed + r. */
  seed: number;
  /** SD of the jitter on the log scale (0 = seeds only). */
  jitter: number;
  settings?: Partial<SaemSettings>;
  /** Importance samples per subject for each run's -2LL. */
  samplesPerSubject: number;
  /** SEs to compare with (natural scale, per population entry); from the first run's post-fit when absent. */
  se?: readonly (number | null)[];
  signal?: SaemOptions['signal'];
  /** The fit already made with `seed` and the spec's own initial values: used as run 1 instead of refitting. */
  first?: RepeatRun;
  onRun?: (run: number, of: number) => void | Promise<void>;
}

export const DEFAULT_REPEAT: Readonly<RepeatOptions> = Object.freeze({ runs: 5, seed: 1, jitter: 0.2, samplesPerSubject: 2000 });

export interface RepeatRun {
  seed: number;
  /** Natural-scale estimates per population entry. */
  estimates: number[];
  minus2LL: number | null;
  mcError: number | null;
  initial: Record<string, number>;
  warnings: string[];
}

export interface RepeatSummary {
  runs: RepeatRun[];
  parameters: { label: string; mean: number; sd: number; min: number; max: number; range: number; se: number | null; rangeOverSe: number | null; stable: boolean | null }[];
  minus2LL: { mean: number | null; sd: number | null; range: number | null; mcError: number | null; stable: boolean | null };
  stable: boolean;
  unstable: string[];
  verdict: string;
  rule: string;
}

/** The spec with initial values jittered (a copy; the input is not modified). */
export function jitterSpec(spec: ModelSpec, jitter: number, rng: { normal(): number }): ModelSpec {
  const parameters: ModelSpec['parameters'] = Object.create(null);
  for (const [name, ps] of Object.entries(spec.parameters) as [keyof ModelSpec['parameters'], ParameterSpec][]) {
    if (!ps) continue;
    let typical = ps.typical;
    if (!ps.fixed) {
      if (ps.transform === 'log') typical *= Math.exp(jitter * rng.normal());
      else if (ps.transform === 'logit') {
        const l = Math.log(typical / (1 - typical)) + jitter * rng.normal();
        typical = 1 / (1 + Math.exp(-l));
      } else typical += jitter * Math.abs(typical) * rng.normal();
    }
    const bsv = ps.bsv === null ? null : ps.bsv * Math.exp(jitter * rng.normal());
    parameters[name] = { ...ps, typical, bsv };
  }
  const residual = { ...spec.residual };
  if (residual.a !== undefined) residual.a *= Math.exp(jitter * rng.normal());
  if (residual.b !== undefined) residual.b *= Math.exp(jitter * rng.normal());
  return { ...spec, parameters, residual };
}

export async function runRepeatedFits(spec: ModelSpec, dataset: Dataset, options: Partial<RepeatOptions> = {}): Promise<RepeatSummary> {
  const o = { ...DEFAULT_REPEAT, ...options };
  if (!(Number.isInteger(o.runs) && o.runs >= 2)) throw new RangeError(`repeated fits need at least 2 runs, got ${o.runs}`);
  const rng = createStreams(o.seed).stream('posthoc', 'robustness', 'jitter');
  const runs: RepeatRun[] = [];
  let firstModel: CompiledModel | null = null;
  let se: readonly (number | null)[] | undefined = o.se;
  if (o.first) runs.push(o.first);
  for (let r = o.first ? 1 : 0; r < o.runs; r++) {
    if (o.onRun) await o.onRun(r + 1, o.runs);
    const runSpec = r === 0 || o.jitter === 0 ? spec : jitterSpec(spec, o.jitter, rng);
    const model = compileModel(runSpec, dataset);
    firstModel ??= model;
    const fit = await runSaem(model, { seed: o.seed + r, ...(o.settings ? { settings: o.settings } : {}), ...(o.signal ? { signal: o.signal } : {}) });
    const layout = parameterLayout(model);
    const w = toWorking(model, layout, fit.theta);
    const estimates = layout.entries.map((e, q) => naturalOf(model, e, w[q]).value);
    let minus2LL: number | null = null;
    let mcError: number | null = null;
    const warnings = [...fit.warnings];
    try {
      const ph = runPosthoc(model, fit.theta, {
        seed: o.seed + r,
        startPhi: fit.individualPhiMean,
        importance: { samplesPerSubject: o.samplesPerSubject },
        diagnostics: false,
        linearisedSe: false,
        conditional: { keepDraws: 100 },
      });
      minus2LL = Number.isFinite(ph.likelihood.importance?.minus2LL ?? NaN) ? ph.likelihood.importance!.minus2LL : null;
      mcError = ph.likelihood.importance?.mcError ?? null;
      if (r === 0 && !se) se = ph.standardErrors.se;
      warnings.push(...ph.warnings);
    } catch (e) {
      warnings.push(`post-fit step failed: ${(e as Error).message}`);
    }
    const initial: Record<string, number> = Object.create(null);
    for (const [name, ps] of Object.entries(runSpec.parameters)) if (ps) initial[name] = ps.typical;
    runs.push({ seed: o.seed + r, estimates, minus2LL, mcError, initial, warnings });
  }
  firstModel ??= compileModel(spec, dataset);
  return summariseRuns(parameterLayout(firstModel).entries.map((e) => e.label), runs, se ?? []);
}

export function summariseRuns(labels: readonly string[], runs: readonly RepeatRun[], se: readonly (number | null)[]): RepeatSummary {
  const parameters = labels.map((label, q) => {
    const v = runs.map((r) => r.estimates[q]);
    const mean = v.reduce((a, b) => a + b, 0) / v.length;
    const sd = Math.sqrt(v.reduce((a, b) => a + (b - mean) * (b - mean), 0) / Math.max(1, v.length - 1));
    const min = Math.min(...v);
    const max = Math.max(...v);
    const s = se[q] ?? null;
    const range = max - min;
    const finite = v.every((x) => Number.isFinite(x));
    return { label, mean, sd, min, max, range, se: s, rangeOverSe: s && s > 0 ? range / s : null, stable: !finite ? false : s && s > 0 ? range <= s : null };
  });
  const ll = runs.map((r) => r.minus2LL).filter((x): x is number => x !== null);
  let m2: RepeatSummary['minus2LL'] = { mean: null, sd: null, range: null, mcError: null, stable: null };
  if (ll.length === runs.length && ll.length > 0) {
    const mean = ll.reduce((a, b) => a + b, 0) / ll.length;
    const sd = Math.sqrt(ll.reduce((a, b) => a + (b - mean) * (b - mean), 0) / Math.max(1, ll.length - 1));
    const range = Math.max(...ll) - Math.min(...ll);
    const mc = Math.max(...runs.map((r) => r.mcError ?? 0));
    m2 = { mean, sd, range, mcError: mc, stable: range <= Math.max(1, 4 * mc) };
  }
  const unstable = parameters.filter((p) => p.stable === false).map((p) => p.label);
  if (m2.stable === false) unstable.push('-2LL');
  const stable = unstable.length === 0;
  return {
    runs: [...runs],
    parameters,
    minus2LL: m2,
    stable,
    unstable,
    verdict: stable
      ? `stable: ${runs.length} runs from different seeds and initial values agree within one SE for every parameter and within the Monte Carlo error for -2LL`
      : `unstable: ${unstable.join(', ')} differ(s) between runs by more than the tolerance; the fit depends on the seed or the initial values (try longer search, better initial values or a simpler model)`,
    rule: 'a parameter is unstable when max - min over the runs exceeds its SE; -2LL when its range exceeds max(1, 4 x Monte Carlo error)',
  };
}
