/**
 * A fit from files run in an engine worker process (docs/architecture.md, "Processes"): the
 * command line's path to the same worker the app uses, so the fit and its post-fit steps are
 * cancellable in every phase (the worker thread is terminated) and a crash cannot take the
 * command with it. The dataset and spec are read and checked here first, so errors in them
 * appear before any process starts.
 */
import { parseModelSpec } from '../../engine/spec/modelSpec.js';
import type { ProgressMessage } from '../protocol/worker.js';
import { runEngineJob } from './engineClient.js';
import { readJsonFile } from './files.js';
import { readDataset } from './fitService.js';
import type { SaemSettings } from '../../engine/saem/settings.js';

export interface FitInWorkerOptions {
  dataPath: string;
  modelPath: string;
  mappingPath?: string;
  seed?: number;
  settings?: Partial<SaemSettings>;
  /** Run the post-fit steps (default true). */
  postFit?: boolean;
  repeat?: number;
  signal?: AbortSignal;
  onProgress?: (p: ProgressMessage) => void;
  /** Compiled engine worker (cliServiceRoots().workerEntry from the CLI). */
  workerEntry: string;
}

/** The fit record (with its post-fit additions unless postFit is false), as fit.json holds it. */
export async function fitFilesInWorker(o: FitInWorkerOptions): Promise<Record<string, unknown>> {
  const dataset = await readDataset(o.dataPath, o.mappingPath);
  const specJson = (await readJsonFile(o.modelPath)) as Record<string, unknown>;
  parseModelSpec(specJson);
  const value = await runEngineJob(
    {
      kind: 'fit',
      dataset: JSON.parse(JSON.stringify(dataset)) as never,
      spec: specJson,
      ...(o.seed !== undefined ? { seed: o.seed } : {}),
      ...(o.settings ? { settings: o.settings as never } : {}),
      postFit: o.postFit !== false,
      ...(o.repeat !== undefined ? { repeat: o.repeat } : {}),
    },
    { modulePath: o.workerEntry },
    { ...(o.signal ? { signal: o.signal } : {}), ...(o.onProgress ? { onProgress: o.onProgress } : {}) },
  );
  return value as Record<string, unknown>;
}
