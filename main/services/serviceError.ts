/**
 * The one error value that crosses every process line (worker -> main -> renderer) and every
 * front door. Services throw ServiceError; hosts turn any error into an ErrorValue with
 * toErrorValue and present it their own way (CLI text, a view's message, an IPC reply).
 */
import { DataError } from '../../engine/data/types.js';
import { SpecError } from '../../engine/spec/modelSpec.js';

export type ServiceErrorKind =
  | 'file' // a file is missing, unreadable, too large or not the kind expected
  | 'data' // the dataset has invalid rows
  | 'spec' // a model spec, patient, target or settings file has invalid fields
  | 'usage' // a request or option is wrong
  | 'cancelled' // the user cancelled
  | 'worker' // a worker process failed (crash, hang, limit)
  | 'numeric' // a numerical breakdown the user must know about
  | 'internal'; // a bug: the message says so and names what was being done

/** Serialisable: plain data only, safe to postMessage, JSON-encode and show. */
export interface ErrorValue {
  kind: ServiceErrorKind;
  message: string;
  /** Every problem, each naming where (file line, sheet row, subject, JSON path). */
  problems: string[];
}

export class ServiceError extends Error {
  readonly kind: ServiceErrorKind;
  readonly problems: string[];
  constructor(kind: ServiceErrorKind, message: string, problems: string[] = []) {
    super(message);
    this.name = 'ServiceError';
    this.kind = kind;
    this.problems = problems;
  }
}

/** Engine and service errors whose messages already say what and where (by class name, so no imports). */
const USER_ERROR_KINDS: ReadonlyMap<string, ServiceErrorKind> = new Map<string, ServiceErrorKind>([
  ['ImportError', 'file'],
  ['DatasetLoadError', 'file'],
  ['WorkbookError', 'file'],
  ['TemplateError', 'spec'],
  ['PatientError', 'spec'],
  ['PopulationModelError', 'spec'],
  ['PriorError', 'spec'],
  ['RegimenParseError', 'usage'],
  ['TargetError', 'spec'],
  ['AdviceError', 'spec'],
  ['ModelDataError', 'data'],
  ['CovariateValueError', 'data'],
  ['PosthocError', 'numeric'],
]);

/**
 * The raw text of an unexpected exception, for people who debug Plateau: shown only when
 * PLATEAU_DEBUG=1 (otherwise ''), never to a user by default, because it names code, not their file.
 */
export function debugDetail(error: unknown): string {
  if (typeof process === 'undefined' || process.env.PLATEAU_DEBUG !== '1') return '';
  const raw = error instanceof Error ? error.message : String(error);
  return ` [debug: ${raw.slice(0, 500)}]`;
}

/** Any thrown value as an ErrorValue; unknown exceptions become 'internal', their raw text only under PLATEAU_DEBUG. */
export function toErrorValue(error: unknown): ErrorValue {
  if (error instanceof ServiceError) return { kind: error.kind, message: error.message, problems: [...error.problems] };
  if (error instanceof DataError) return { kind: 'data', message: error.message, problems: error.problems.map((p) => [p.row !== undefined ? `line ${p.row}` : '', p.subject !== undefined ? `subject ${p.subject}` : '', p.field ?? '', p.message].filter(Boolean).join(': ')) };
  if (error instanceof SpecError) return { kind: 'spec', message: error.message, problems: [...error.problems] };
  if (error instanceof Error && error.name === 'AbortError') return { kind: 'cancelled', message: error.message || 'cancelled', problems: [] };
  if (error instanceof Error && USER_ERROR_KINDS.has(error.name)) {
    const problems = (error as { problems?: unknown }).problems;
    return { kind: USER_ERROR_KINDS.get(error.name)!, message: error.message, problems: Array.isArray(problems) ? problems.map((p) => (typeof p === 'string' ? p : JSON.stringify(p))) : [] };
  }
  return { kind: 'internal', message: `internal error: an unexpected failure in Plateau (not a problem in your files); run again with PLATEAU_DEBUG=1 to see it${debugDetail(error)}`, problems: [] };
}
