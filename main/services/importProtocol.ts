/**
 * Messages between the import service and the parse worker, validated on both sides: the worker
 * trusts nothing it is sent, the service trusts nothing it gets back (the worker has just parsed
 * an untrusted file).
 */
import type { ImportOptions } from '../../engine/import/roles.js';
import type { Analysis } from '../../engine/import/analyse.js';

export interface ParseRequest {
  type: 'parse';
  id: string;
  fileName: string;
  bytes: Uint8Array;
  /** Parsed JSON of a mapping template (validated in the worker by parseTemplate). */
  mapping?: unknown;
  options?: Partial<ImportOptions>;
  /** Row cap per sheet (previews, fuzzing). */
  maxRows?: number;
}

/** CPU and wall time the worker spent on one request (ms), for benchmarks and logs. */
export interface WorkerTiming {
  cpuMs: number;
  wallMs: number;
}

export type ParseResponse =
  | { type: 'result'; id: string; analysis: Analysis; timing?: WorkerTiming }
  | { type: 'error'; id: string; kind: 'workbook' | 'template' | 'request' | 'internal'; message: string; problems?: string[] };

const isRecord = (x: unknown): x is Record<string, unknown> => typeof x === 'object' && x !== null && !Array.isArray(x);

/** Worker side: the request as sent, or the reason it is not one. */
export function validateParseRequest(x: unknown): { ok: true; request: ParseRequest } | { ok: false; id: string; message: string } {
  const id = isRecord(x) && typeof x.id === 'string' ? x.id : '';
  if (!isRecord(x)) return { ok: false, id, message: 'the request is not an object' };
  if (x.type !== 'parse') return { ok: false, id, message: `unknown request type ${JSON.stringify(x.type)}` };
  if (typeof x.id !== 'string' || x.id.length === 0 || x.id.length > 100) return { ok: false, id, message: 'the request id is missing' };
  if (typeof x.fileName !== 'string' || x.fileName.length > 4096) return { ok: false, id, message: 'fileName must be text' };
  if (!(x.bytes instanceof Uint8Array)) return { ok: false, id, message: 'bytes must be a Uint8Array' };
  if (x.options !== undefined && !isRecord(x.options)) return { ok: false, id, message: 'options must be an object' };
  if (x.maxRows !== undefined && !(Number.isInteger(x.maxRows) && (x.maxRows as number) > 0)) return { ok: false, id, message: 'maxRows must be a positive integer' };
  const request: ParseRequest = { type: 'parse', id: x.id, fileName: x.fileName, bytes: x.bytes };
  if (x.mapping !== undefined) request.mapping = x.mapping;
  if (x.options !== undefined) request.options = x.options as Partial<ImportOptions>;
  if (x.maxRows !== undefined) request.maxRows = x.maxRows as number;
  return { ok: true, request };
}

/** Service side: the response shape is checked; the dataset inside is re-validated by the caller (createDataset). */
export function validateParseResponse(x: unknown, id: string): { ok: true; response: ParseResponse } | { ok: false; message: string } {
  if (!isRecord(x)) return { ok: false, message: 'the worker sent something that is not a message object' };
  if (x.id !== id) return { ok: false, message: `the worker answered request ${JSON.stringify(x.id)}, expected ${id}` };
  if (x.type === 'error') {
    const kinds = ['workbook', 'template', 'request', 'internal'];
    if (typeof x.message !== 'string' || typeof x.kind !== 'string' || !kinds.includes(x.kind)) return { ok: false, message: 'malformed error message from the worker' };
    if (x.problems !== undefined && !(Array.isArray(x.problems) && x.problems.every((p) => typeof p === 'string'))) return { ok: false, message: 'malformed problem list from the worker' };
    return { ok: true, response: x as ParseResponse };
  }
  if (x.type !== 'result') return { ok: false, message: `unknown message type ${JSON.stringify(x.type)} from the worker` };
  const a = x.analysis;
  if (!isRecord(a)) return { ok: false, message: 'the worker result has no analysis' };
  if (!Array.isArray(a.preview) || !isRecord(a.mapping) || typeof a.suggested !== 'boolean' || !Array.isArray(a.skippedSheets)) return { ok: false, message: 'the worker result is incomplete' };
  const r = a.report;
  if (!isRecord(r) || !isRecord(r.summary) || !Array.isArray(r.problems) || !Array.isArray(r.excluded) || !Array.isArray(r.notes)) return { ok: false, message: 'the worker report is malformed' };
  for (const k of ['patients', 'doses', 'levels', 'censored', 'excludedRows']) if (typeof r.summary[k] !== 'number') return { ok: false, message: `the worker summary lacks ${k}` };
  for (const p of r.problems) {
    if (!isRecord(p) || typeof p.sheet !== 'string' || typeof p.row !== 'number' || typeof p.column !== 'string' || typeof p.value !== 'string' || typeof p.message !== 'string' || (p.severity !== 'error' && p.severity !== 'warning'))
      return { ok: false, message: 'a problem in the worker report is malformed' };
  }
  if (x.timing !== undefined && !(isRecord(x.timing) && typeof x.timing.cpuMs === 'number' && typeof x.timing.wallMs === 'number')) return { ok: false, message: 'the worker timing is malformed' };
  if (a.dataset !== undefined) {
    const d = a.dataset;
    if (!isRecord(d) || !Array.isArray(d.subjects) || !Array.isArray(d.covariateNames)) return { ok: false, message: 'the worker dataset is malformed' };
  }
  return { ok: true, response: x as ParseResponse };
}
