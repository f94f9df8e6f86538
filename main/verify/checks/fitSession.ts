/**
 * Datasets, models and fits that several checks share, computed once per run through the same
 * services as `plateau fit` (fitDataset, addPosthoc). Each dataset of suite.json names its data
 * file, model spec, reference file and the map from fit-record estimates to reference keys.
 */
import { parseCanonicalCsv } from '../../../engine/data/canonicalCsv.js';
import type { Dataset } from '../../../engine/data/types.js';
import { runPosthoc, type PosthocResult } from '../../../engine/posthoc/index.js';
import type { FitRecord } from '../../../engine/saem/fitRecord.js';
import { parseModelSpec, type ModelSpec } from '../../../engine/spec/modelSpec.js';
import { compileModel, type CompiledModel, type PopulationParameters } from '../../../engine/stats/model.js';
import { fitDataset, type FitOutcome } from '../../services/fitService.js';
import { addPosthoc, type PosthocFitRecord } from '../../services/fitPosthoc.js';
import type { ValidationFiles } from '../suite.js';
import type { DatasetEntry, EstimateMap } from '../types.js';

export interface LoadedDataset {
  name: string;
  entry: DatasetEntry;
  dataset: Dataset;
  spec: ModelSpec;
  model: CompiledModel;
  /** The reference file, parsed. */
  reference: any;
}

/** `a.b.c` of an object (reference files keep estimates and SEs under such paths). */
export function dig(obj: unknown, dotted: string): any {
  let v: any = obj;
  for (const k of dotted.split('.')) v = v && typeof v === 'object' ? v[k] : undefined;
  return v;
}

/** The estimate of the fit record that `m` points to (NaN when absent). */
export function estimateOf(record: Pick<FitRecord, 'population'>, m: EstimateMap, field: 'estimate' | 'se' = 'estimate'): number {
  const e = record.population.find((p) => p.kind === m.kind && p.parameter === m.parameter && (m.covariate === undefined || (p as { covariate?: string }).covariate === m.covariate));
  const v = e ? (e as unknown as Record<string, number | null | undefined>)[field] : undefined;
  return typeof v === 'number' ? v : NaN;
}

export class FitSession {
  private readonly files: ValidationFiles;
  private readonly datasets: Record<string, DatasetEntry>;
  private readonly loaded = new Map<string, Promise<LoadedDataset>>();
  private readonly fits = new Map<string, Promise<FitOutcome>>();
  private readonly posthocFits = new Map<string, Promise<PosthocFitRecord>>();
  private readonly atReference = new Map<string, Promise<PosthocResult>>();
  signal?: AbortSignal;

  constructor(files: ValidationFiles, datasets: Record<string, DatasetEntry> | undefined) {
    this.files = files;
    this.datasets = datasets ?? Object.create(null);
  }

  load(name: string): Promise<LoadedDataset> {
    let l = this.loaded.get(name);
    if (!l) {
      l = (async () => {
        const entry = Object.hasOwn(this.datasets, name) ? this.datasets[name] : undefined;
        if (!entry) throw new Error(`suite.json has no dataset "${name}"`);
        const dataset = parseCanonicalCsv(await this.files.readText(entry.data));
        const spec = parseModelSpec(entry.model);
        const reference = await this.files.readJson(entry.reference);
        if (typeof dig(reference, entry.referenceEstimates) !== 'object') throw new Error(`${entry.reference} has no "${entry.referenceEstimates}"`);
        return { name, entry, dataset, spec, model: compileModel(spec, dataset), reference };
      })();
      this.loaded.set(name, l);
    }
    return l;
  }

  fit(name: string, seed: number): Promise<FitOutcome> {
    const key = `${name}:${seed}`;
    let f = this.fits.get(key);
    if (!f) {
      f = (async () => {
        const { dataset, spec } = await this.load(name);
        return fitDataset(dataset, spec, { seed, ...(this.signal ? { signal: this.signal } : {}) });
      })();
      this.fits.set(key, f);
    }
    return f;
  }

  fitWithPosthoc(name: string, seed: number): Promise<PosthocFitRecord> {
    const key = `${name}:${seed}`;
    let f = this.posthocFits.get(key);
    if (!f) {
      f = (async () => addPosthoc(await this.fit(name, seed)))();
      this.posthocFits.set(key, f);
    }
    return f;
  }

  /**
   * The post-fit steps (modes, SEs, -2LL) evaluated at the reference's own optimum, given on the
   * optimiser scale as `theta` (log typical values, log BSV SDs, log a; diagonal Omega, additive
   * error, no covariates): isolates the post-fit accuracy from the estimator's.
   */
  posthocAtReference(name: string, seed: number): Promise<PosthocResult> {
    const key = `${name}:${seed}`;
    let r = this.atReference.get(key);
    if (!r) {
      r = (async () => {
        const { model, reference, spec } = await this.load(name);
        const nTyp = model.nParams;
        const t = reference.theta as number[];
        if (!Array.isArray(t) || t.length !== 2 * nTyp + 1 || model.nEta !== nTyp || spec.covariates.length > 0 || spec.residual.model !== 'additive')
          throw new Error(`the "${name}" reference must hold "theta": log typical values, log BSV SDs, log additive SD (no covariates)`);
        const sd = t.slice(nTyp, 2 * nTyp).map(Math.exp);
        const omega = new Float64Array(nTyp * nTyp);
        sd.forEach((s, k) => (omega[k * nTyp + k] = s * s));
        const theta: PopulationParameters = { mu: Float64Array.from(t.slice(0, nTyp)), beta: new Float64Array(0), omega, a: Math.exp(t[2 * nTyp]), b: 0 };
        return runPosthoc(model, theta, { seed, diagnostics: false });
      })();
      this.atReference.set(key, r);
    }
    return r;
  }
}
