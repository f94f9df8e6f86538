/**
 * Population fit from files: read the dataset and the model spec, compile, run SAEM, build the
 * fit record. One entry point for the CLI, the worker and the tests.
 */
import { datasetHash } from '../../engine/data/hash.js';
import { covariateRanges } from '../../engine/data/dataset.js';
import type { Dataset } from '../../engine/data/types.js';
import { buildFitRecord, type FitRecord } from '../../engine/saem/fitRecord.js';
import { runSaem, type AbortSignalLike, type SaemProgress } from '../../engine/saem/saem.js';
import { parseSaemSettings, resolveChains, type SaemSettings } from '../../engine/saem/settings.js';
import { resourceLimits as threadResourceLimits, isMainThread } from 'node:worker_threads';
import { threadsForFit, workerThreadHost, type FitThreadHost } from '../worker/saemThreads.js';
import { parseModelSpec, type ModelSpec } from '../../engine/spec/modelSpec.js';
import { compileModel, type CompiledModel } from '../../engine/stats/model.js';
import { readJsonFile } from './files.js';

/** In a job thread, its heap limits, given to the fit's block threads too. */
const workerResourceLimits = isMainThread ? undefined : threadResourceLimits;

export interface FitFromFilesOptions {
  dataPath: string;
  modelPath: string;
  mappingPath?: string;
  seed?: number;
  settings?: Partial<SaemSettings>;
  onProgress?: (p: SaemProgress) => void | Promise<void>;
  signal?: AbortSignalLike;
  /** Cores granted to the fit: the estimator uses them when the fit is large enough (main/worker/saemThreads.ts). */
  threads?: number;
}

export interface FitOutcome {
  record: FitRecord;
  model: CompiledModel;
  dataset: Dataset;
  spec: ModelSpec;
  /** Cores granted to the fit (its post-fit steps use them too: main/services/fitPosthoc.ts). */
  threads?: number;
}

/** The host of a fit's block threads, with the job thread's heap limits when there is one. */
export function fitThreadHost(threads: number): FitThreadHost {
  return workerThreadHost(threads, workerResourceLimits ? { resourceLimits: workerResourceLimits } : {});
}

/** Read a dataset: canonical CSV, or a spreadsheet export with its mapping template (the shared loader). */
export async function readDataset(dataPath: string, mappingPath?: string): Promise<Dataset> {
  // Loaded here, not with this module: a fit job in a worker gets its dataset as data and
  // would otherwise load the spreadsheet reader for nothing.
  const { loadDataset } = await import('./datasetLoader.js');
  return loadDataset(dataPath, mappingPath !== undefined ? { mapping: mappingPath } : {});
}

export async function fitFromFiles(options: FitFromFilesOptions): Promise<FitOutcome> {
  const dataset = await readDataset(options.dataPath, options.mappingPath);
  const spec = parseModelSpec(await readJsonFile(options.modelPath));
  return fitDataset(dataset, spec, options);
}

export async function fitDataset(
  dataset: Dataset,
  spec: ModelSpec,
  options: Pick<FitFromFilesOptions, 'seed' | 'settings' | 'onProgress' | 'signal' | 'threads'> = {},
): Promise<FitOutcome> {
  const model = compileModel(spec, dataset);
  const chains = resolveChains(parseSaemSettings(spec.estimation, options.settings ?? {}), model.nSubjects);
  const threads = threadsForFit(options.threads ?? 1, model.nObsTotal, chains);
  const result = await runSaem(model, {
    ...(threads > 1 ? { threads: fitThreadHost(threads) } : {}),
    ...(options.seed !== undefined ? { seed: options.seed } : {}),
    ...(options.settings ? { settings: options.settings } : {}),
    ...(options.onProgress ? { onProgress: options.onProgress } : {}),
    ...(options.signal ? { signal: options.signal, yieldToHost: () => new Promise<void>((resolve) => setImmediate(resolve)) } : {}),
  });
  return { record: buildFitRecord(model, result, datasetHash(dataset), covariateRanges(dataset)), model, dataset, spec, ...(options.threads !== undefined ? { threads: options.threads } : {}) };
}
