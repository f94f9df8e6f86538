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

/** Any thrown value as an ErrorValue; unknown exceptions become 'internal' with their message. */
export function toErrorValue(error: unknown): ErrorValue {
  if (error instanceof ServiceError) return { kind: error.kind, message: error.message, problems: [...error.problems] };
  if (error instanceof DataError) return { kind: 'data', message: error.message, problems: error.problems.map((p) => [p.row !== undefined ? `line ${p.row}` : '', p.subject !== undefined ? `subject ${p.subject}` : '', p.field ?? '', p.message].filter(Boolean).join(': ')) };
  if (error instanceof SpecError) return { kind: 'spec', message: error.message, problems: [...error.problems] };
  if (error instanceof Error && error.name === 'AbortError') return { kind: 'cancelled', message: error.message || 'cancelled', problems: [] };
  const message = error instanceof Error ? error.message : String(error);
  return { kind: 'internal', message: `internal error: ${message}`, problems: [] };
}
