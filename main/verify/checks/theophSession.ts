/**
 * The Theoph data, model and results that several checks share (R datasets::Theoph, read from
 * the shipped reference/theoph/theoph.csv): the post-fit steps at the exact MLE and the fits
 * per seed are computed once per run, through the same services as `plateau fit`.
 */
import { parseCanonicalCsv } from '../../../engine/data/canonicalCsv.js';
import type { Dataset } from '../../../engine/data/types.js';
import { runPosthoc, type PosthocResult } from '../../../engine/posthoc/index.js';
import { parseModelSpec, type ModelSpec } from '../../../engine/spec/modelSpec.js';
import { compileModel, type CompiledModel, type PopulationParameters } from '../../../engine/stats/model.js';
import { fitDataset, type FitOutcome } from '../../services/fitService.js';
import { addPosthoc, type PosthocFitRecord } from '../../services/fitPosthoc.js';
import type { ValidationFiles } from '../suite.js';

export const THEOPH_DATA = 'reference/theoph/theoph.csv';
export const THEOPH_EXACT = 'reference/theoph/exact_mle.json';

/** Layout of exact_mle.json (see its notes and tests/reference/README.md). */
export interface TheophExact {
  estimates: Record<string, number>;
  theta: number[];
  minus2LL: number;
  standardErrors: { naturalScale: Record<string, number> };
  quadratureConvergence: { nodesPerDimension: number; minus2LL: number }[];
  perSubject: { subject: string; logMarginal: number; etaMode: number[] }[];
}

/** Fit-record parameter (kind, name) -> exact_mle.json key, in the record's order. */
export const THEOPH_KEYS: { kind: string; parameter: string; key: string; label: string }[] = [
  { kind: 'typical', parameter: 'CL', key: 'CL_L_per_h_per_kg', label: 'CL (L/h/kg)' },
  { kind: 'typical', parameter: 'V', key: 'V_L_per_kg', label: 'V (L/kg)' },
  { kind: 'typical', parameter: 'ka', key: 'ka_per_h', label: 'ka (1/h)' },
  { kind: 'bsv', parameter: 'CL', key: 'omega_CL', label: 'BSV SD of log CL' },
  { kind: 'bsv', parameter: 'V', key: 'omega_V', label: 'BSV SD of log V' },
  { kind: 'bsv', parameter: 'ka', key: 'omega_ka', label: 'BSV SD of log ka' },
  { kind: 'residual', parameter: 'a', key: 'a_mg_L', label: 'additive residual SD (mg/L)' },
];

export class TheophSession {
  private readonly files: ValidationFiles;
  private readonly modelJson: unknown;
  private base?: Promise<{ dataset: Dataset; spec: ModelSpec; model: CompiledModel; exact: TheophExact }>;
  private atExact?: Promise<PosthocResult>;
  private readonly fits = new Map<number, Promise<FitOutcome>>();
  private readonly fitPosthoc = new Map<number, Promise<PosthocFitRecord>>();
  signal?: AbortSignal;

  constructor(files: ValidationFiles, modelJson: unknown) {
    this.files = files;
    this.modelJson = modelJson;
  }

  load() {
    this.base ??= (async () => {
      const dataset = parseCanonicalCsv(await this.files.readText(THEOPH_DATA));
      const spec = parseModelSpec(this.modelJson);
      const exact = await this.files.readJson<TheophExact>(THEOPH_EXACT);
      if (!Array.isArray(exact.theta) || exact.theta.length !== 7) throw new Error(`${THEOPH_EXACT}: "theta" must hold the 7 optimiser-scale parameters`);
      return { dataset, spec, model: compileModel(spec, dataset), exact };
    })();
    return this.base;
  }

  /** The exact MLE as population parameters: log CL, log V, log ka, log omegas, log a (exact_mle.json theta). */
  async exactTheta(): Promise<PopulationParameters> {
    const t = (await this.load()).exact.theta;
    const sd = t.slice(3, 6).map(Math.exp);
    return { mu: Float64Array.from(t.slice(0, 3)), beta: new Float64Array(0), omega: Float64Array.from([sd[0] ** 2, 0, 0, 0, sd[1] ** 2, 0, 0, 0, sd[2] ** 2]), a: Math.exp(t[6]), b: 0 };
  }

  /** The post-fit steps (modes, SEs, -2LL) evaluated at the exact MLE: isolates their accuracy. */
  posthocAtExact(): Promise<PosthocResult> {
    this.atExact ??= (async () => {
      const { model } = await this.load();
      return runPosthoc(model, await this.exactTheta(), { seed: 11, diagnostics: false });
    })();
    return this.atExact;
  }

  fit(seed: number): Promise<FitOutcome> {
    let f = this.fits.get(seed);
    if (!f) {
      f = (async () => {
        const { dataset, spec } = await this.load();
        return fitDataset(dataset, spec, { seed, ...(this.signal ? { signal: this.signal } : {}) });
      })();
      this.fits.set(seed, f);
    }
    return f;
  }

  fitWithPosthoc(seed: number): Promise<PosthocFitRecord> {
    let f = this.fitPosthoc.get(seed);
    if (!f) {
      f = (async () => addPosthoc(await this.fit(seed)))();
      this.fitPosthoc.set(seed, f);
    }
    return f;
  }
}
