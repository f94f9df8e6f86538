/**
 * Population fit from files: read the dataset and the model spec, compile, run SAEM, build the
 * fit record. One entry point for the CLI, the worker and the tests.
 */
import * as path from 'node:path';
import { parseCanonicalCsv } from '../../engine/data/canonicalCsv.js';
import { datasetHash } from '../../engine/data/hash.js';
import type { Dataset } from '../../engine/data/types.js';
import { buildFitRecord, type FitRecord } from '../../engine/saem/fitRecord.js';
import { runSaem, type AbortSignalLike, type SaemProgress } from '../../engine/saem/saem.js';
import type { SaemSettings } from '../../engine/saem/settings.js';
import { parseModelSpec, type ModelSpec } from '../../engine/spec/modelSpec.js';
import { compileModel, type CompiledModel } from '../../engine/stats/model.js';
import { CliError } from '../cli/types.js';
import { readJsonFile, readTextFile } from '../cli/io.js';

export interface FitFromFilesOptions {
  dataPath: string;
  modelPath: string;
  mappingPath?: string;
  seed?: number;
  settings?: Partial<SaemSettings>;
  onProgress?: (p: SaemProgress) => void | Promise<void>;
  signal?: AbortSignalLike;
}

export interface FitOutcome {
  record: FitRecord;
  model: CompiledModel;
  dataset: Dataset;
  spec: ModelSpec;
}

/** Read a dataset: canonical CSV directly; spreadsheets and mapped exports through the dataset loader. */
export async function readDataset(dataPath: string, mappingPath?: string): Promise<Dataset> {
  const ext = path.extname(dataPath).toLowerCase();
  if (ext === '.csv' && mappingPath === undefined) return parseCanonicalCsv(await readTextFile(dataPath));
  // The shared loader handles spreadsheets and column mappings (main/services/datasetLoader.ts).
  const loaderPath = './datasetLoader.js';
  let loader: { loadDataset?: (p: string, o?: { mapping?: string }) => Promise<Dataset> };
  try {
    loader = (await import(loaderPath)) as typeof loader;
  } catch {
    throw new CliError(`cannot read ${dataPath}: only canonical CSV is supported in this build (the spreadsheet loader is missing)`);
  }
  if (typeof loader.loadDataset !== 'function') throw new CliError(`cannot read ${dataPath}: the dataset loader has no loadDataset`);
  return loader.loadDataset(dataPath, mappingPath !== undefined ? { mapping: mappingPath } : {});
}

export async function fitFromFiles(options: FitFromFilesOptions): Promise<FitOutcome> {
  const dataset = await readDataset(options.dataPath, options.mappingPath);
  const spec = parseModelSpec(await readJsonFile(options.modelPath));
  return fitDataset(dataset, spec, options);
}

export async function fitDataset(
  dataset: Dataset,
  spec: ModelSpec,
  options: Pick<FitFromFilesOptions, 'seed' | 'settings' | 'onProgress' | 'signal'> = {},
): Promise<FitOutcome> {
  const model = compileModel(spec, dataset);
  const result = await runSaem(model, {
    ...(options.seed !== undefined ? { seed: options.seed } : {}),
    ...(options.settings ? { settings: options.settings } : {}),
    ...(options.onProgress ? { onProgress: options.onProgress } : {}),
    ...(options.signal ? { signal: options.signal } : {}),
  });
  return { record: buildFitRecord(model, result, datasetHash(dataset)), model, dataset, spec };
}
