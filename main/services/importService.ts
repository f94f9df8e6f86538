/**
 * Spreadsheet import for the CLI, the web host and the app: reads the file (size limit), parses
 * it in a worker process (time and memory limits), and rebuilds the dataset from the worker's
 * answer through createDataset, so nothing from the untrusted side is used unchecked.
 */
import { existsSync } from 'node:fs';
import * as path from 'node:path';
import { randomUUID } from 'node:crypto';
import { fileURLToPath } from 'node:url';
import { createDataset } from '../../engine/data/dataset.js';
import { DataError, type Dataset } from '../../engine/data/types.js';
import type { Analysis } from '../../engine/import/analyse.js';
import type { ImportOptions } from '../../engine/import/roles.js';
import { validateParseResponse, type ParseRequest, type WorkerTiming } from './importProtocol.js';
import { spawnNodeWorker, type SpawnWorker } from './workerSpawner.js';
import { readRegularFile } from './fileGuard.js';
import { DEFAULT_MAX_FILE_BYTES, DEFAULT_PARSE_TIME_LIMIT_MS, DEFAULT_WORKER_HEAP_MB } from '../worker/limits.js';

/** A failure the user can act on: the message says what and what to do. */
export class ImportError extends Error {
  readonly kind: 'file' | 'too-large' | 'timeout' | 'memory' | 'workbook' | 'template' | 'worker' | 'aborted';
  readonly problems: readonly string[];
  constructor(kind: ImportError['kind'], message: string, problems: readonly string[] = []) {
    super(message);
    this.name = 'ImportError';
    this.kind = kind;
    this.problems = problems;
  }
}

export interface ImportFileOptions {
  /** Parsed JSON of a mapping template; without it the suggested mapping is used. */
  mapping?: unknown;
  options?: Partial<ImportOptions>;
  maxBytes?: number;
  timeLimitMs?: number;
  heapMb?: number;
  maxRows?: number;
  spawn?: SpawnWorker;
  /** Worker module; default the compiled dist/main/worker/parseWorker.js. */
  workerPath?: string;
  signal?: AbortSignal;
}

export interface ImportOutcome extends Analysis {
  /** Re-validated in this process. */
  dataset: Dataset | undefined;
  /** Time the worker spent parsing and checking. */
  workerTiming?: WorkerTiming;
}

/** Where the compiled worker is: beside this module under dist/, else the repository's dist/. */
export function parseWorkerPath(): string {
  const here = path.dirname(fileURLToPath(import.meta.url));
  const sibling = path.join(here, '..', 'worker', 'parseWorker.js');
  if (here.split(path.sep).includes('dist') && existsSync(sibling)) return sibling;
  let dir = here;
  for (let i = 0; i < 6; i++) {
    if (existsSync(path.join(dir, 'package.json'))) return path.join(dir, 'dist', 'main', 'worker', 'parseWorker.js');
    dir = path.dirname(dir);
  }
  return sibling;
}

export async function readFileLimited(file: string, maxBytes: number): Promise<Uint8Array> {
  let buf: Buffer;
  try {
    // Regular files only, size checked on the open handle before reading (fileGuard.ts).
    buf = await readRegularFile(file, { maxBytes, what: 'spreadsheet file' });
  } catch (e) {
    const message = (e as Error).message;
    throw new ImportError(/above the limit/.test(message) ? 'too-large' : 'file', /above the limit/.test(message) ? `${message} (the import limit; export fewer rows or columns)` : message);
  }
  return new Uint8Array(buf.buffer, buf.byteOffset, buf.length);
}

/** Parse bytes in a worker process; resolves with the worker's validated analysis. */
export function parseInWorker(request: Omit<ParseRequest, 'type' | 'id'>, opts: ImportFileOptions = {}): Promise<Analysis & { workerTiming?: WorkerTiming }> {
  const spawn = opts.spawn ?? spawnNodeWorker;
  const workerPath = opts.workerPath ?? parseWorkerPath();
  if (!opts.spawn && !existsSync(workerPath))
    return Promise.reject(new ImportError('worker', `the spreadsheet worker is not built (${workerPath}): run \`npm run build\` first`));
  const timeLimitMs = opts.timeLimitMs ?? DEFAULT_PARSE_TIME_LIMIT_MS;
  const heapMb = opts.heapMb ?? DEFAULT_WORKER_HEAP_MB;
  const id = randomUUID();
  return new Promise<Analysis & { workerTiming?: WorkerTiming }>((resolve, reject) => {
    if (opts.signal?.aborted) return reject(new ImportError('aborted', 'the import was cancelled'));
    const worker = spawn({ modulePath: workerPath, execArgv: [`--max-old-space-size=${heapMb}`] });
    let settled = false;
    const finish = (fn: () => void) => {
      if (settled) return;
      settled = true;
      clearTimeout(timer);
      opts.signal?.removeEventListener('abort', onAbort);
      worker.kill();
      fn();
    };
    const timer = setTimeout(
      () => finish(() => reject(new ImportError('timeout', `parsing ${request.fileName} took longer than ${formatSeconds(timeLimitMs)} s and was stopped: the file may be malformed or very large; save it again as .xlsx or .csv with fewer rows`))),
      timeLimitMs,
    );
    const onAbort = () => finish(() => reject(new ImportError('aborted', 'the import was cancelled')));
    opts.signal?.addEventListener('abort', onAbort, { once: true });
    worker.onMessage((raw) => {
      const v = validateParseResponse(raw, id);
      if (!v.ok) return finish(() => reject(new ImportError('worker', `the spreadsheet worker misbehaved (${v.message}); the file was not imported`)));
      const r = v.response;
      if (r.type === 'error') {
        const kind = r.kind === 'template' ? 'template' : r.kind === 'workbook' || r.kind === 'internal' ? 'workbook' : 'worker';
        return finish(() => reject(new ImportError(kind, r.message, r.problems ?? [])));
      }
      finish(() => resolve(r.timing ? { ...r.analysis, workerTiming: r.timing } : r.analysis));
    });
    worker.onExit((code, signal) => {
      if (settled) return;
      const tail = worker.stderrTail();
      const oom = /heap out of memory|Allocation failed/i.test(tail);
      finish(() =>
        reject(
          oom
            ? new ImportError('memory', `parsing ${request.fileName} needed more than ${heapMb} MB of memory and was stopped: the file is too large or malformed`)
            : new ImportError('worker', `the spreadsheet worker stopped unexpectedly (${signal ?? `exit code ${code}`}) while parsing ${request.fileName}; the file was not imported`),
        ),
      );
    });
    const message: ParseRequest = { type: 'parse', id, ...request };
    worker.postMessage(message);
  });
}

/** Rebuild (and so re-validate) a dataset that crossed the process line. */
export function revalidateDataset(d: Dataset): Dataset {
  try {
    return createDataset(
      d.subjects.map((s) => ({
        id: s.id,
        covariates: Object.assign(Object.create(null), s.covariates) as Record<string, string | number>,
        doses: s.doses.map((x) => ({ ...x })),
        observations: s.observations.map((x) => ({ ...x })),
      })),
      d.covariateNames,
    );
  } catch (e) {
    if (e instanceof DataError) throw new ImportError('worker', `the dataset from the spreadsheet worker is invalid: ${e.message}`);
    throw e;
  }
}

/** Import a spreadsheet file: size limit here, parsing in the worker, dataset re-validated. */
export async function importSpreadsheetFile(file: string, opts: ImportFileOptions = {}): Promise<ImportOutcome> {
  const bytes = await readFileLimited(file, opts.maxBytes ?? DEFAULT_MAX_FILE_BYTES);
  const request: Omit<ParseRequest, 'type' | 'id'> = { fileName: path.basename(file), bytes };
  if (opts.mapping !== undefined) request.mapping = opts.mapping;
  if (opts.options !== undefined) request.options = opts.options;
  if (opts.maxRows !== undefined) request.maxRows = opts.maxRows;
  const analysis = await parseInWorker(request, opts);
  return { ...analysis, dataset: analysis.dataset ? revalidateDataset(analysis.dataset) : undefined };
}

const SPREADSHEET_EXT = /\.(xlsx|xlsm|xls|ods)$/i;

/** True for files the spreadsheet import handles (.csv only when it is not the canonical CSV). */
export function isSpreadsheetPath(file: string): boolean {
  return SPREADSHEET_EXT.test(file);
}

/** A time limit in seconds as given (0.05 stays 0.05, 60 stays 60): at most 3 decimals, trailing zeros dropped. */
export function formatSeconds(ms: number): string {
  return String(Number((ms / 1000).toFixed(3)));
}
