/** What every check implementation receives and returns, and small helpers for its rows. */
import type { ValidationFiles } from '../suite.js';
import type { CheckRow, CheckSpec, ToleranceValues } from '../types.js';
import type { FitSession } from './fitSession.js';

export interface CheckContext {
  files: ValidationFiles;
  signal?: AbortSignal;
  /** Datasets, models and fits shared by checks, computed once per run. */
  fits: FitSession;
}

export interface CheckOutcome {
  rows: CheckRow[];
  /** One line: the value found against the limit. */
  found: string;
}

export interface CheckKind {
  run(spec: CheckSpec, ctx: CheckContext): Promise<CheckOutcome>;
  /** The tolerance in words, from the values in suite.json. */
  describe(tolerance: ToleranceValues): string;
}

/** A numeric tolerance from suite.json; a missing or non-numeric one is a damaged suite. */
export function tol(values: ToleranceValues, ...keys: string[]): number {
  let v: unknown = values;
  for (const k of keys) v = v && typeof v === 'object' ? (v as ToleranceValues)[k] : undefined;
  if (typeof v !== 'number' || !Number.isFinite(v)) throw new Error(`suite.json: tolerance ${keys.join('.')} is missing or not a number`);
  return v;
}

export const fmt = (x: number): string => {
  if (!Number.isFinite(x)) return String(x);
  if (x === 0) return '0';
  const a = Math.abs(x);
  return a >= 1e5 || a < 1e-3 ? x.toExponential(3) : Number(x.toPrecision(6)).toString();
};

/** |found - ref| / |ref| against a relative limit. */
export function relativeRow(quantity: string, reference: number, found: number, limit: number): CheckRow {
  const error = Math.abs(found - reference) / Math.abs(reference);
  return { quantity, reference, found, error, limit: `relative <= ${fmt(limit)}`, allowed: limit, pass: Number.isFinite(found) && error <= limit };
}

/** |found - ref| against an absolute limit. */
export function absoluteRow(quantity: string, reference: number, found: number, limit: number, unit = ''): CheckRow {
  const error = Math.abs(found - reference);
  return { quantity, reference, found, error, limit: `absolute <= ${fmt(limit)}${unit}`, allowed: limit, pass: Number.isFinite(found) && error <= limit };
}

/** "all N within limits; largest ..." or "K of N outside: first ..." for the found column. */
export function summarise(rows: CheckRow[], what: string): string {
  const failed = rows.filter((r) => !r.pass);
  // The row that came closest to its limit (error / allowed), so mixed units never compare.
  const ratio = (r: CheckRow) => r.error! / r.allowed!;
  const ranked = rows.filter((r) => r.error !== undefined && r.allowed !== undefined && r.allowed > 0 && Number.isFinite(ratio(r)));
  const worst = ranked.length ? ranked.reduce((a, b) => (ratio(b) > ratio(a) ? b : a)) : undefined;
  const worstText = worst ? `; closest to its limit: ${worst.quantity}, error ${fmt(worst.error!)} (limit ${worst.limit})` : '';
  if (failed.length === 0) return `all ${rows.length} ${what} within tolerance${worstText}`;
  const f = failed[0];
  return `${failed.length} of ${rows.length} ${what} outside tolerance: ${f.quantity} found ${typeof f.found === 'number' ? fmt(f.found) : f.found}, reference ${typeof f.reference === 'number' ? fmt(f.reference) : f.reference}${f.error !== undefined ? `, error ${fmt(f.error)}` : ''} (limit ${f.limit ?? 'exact'})`;
}

/** The dataset name of a check (suite.json "dataset"). */
export function datasetOf(spec: CheckSpec): string {
  if (typeof spec.dataset !== 'string') throw new Error(`suite.json: check ${spec.id} needs "dataset"`);
  return spec.dataset;
}

/** The seed of a check (suite.json "seed", a whole number). */
export function seedOf(spec: CheckSpec): number {
  if (typeof spec.seed !== 'number' || !Number.isSafeInteger(spec.seed)) throw new Error(`suite.json: check ${spec.id} needs a whole-number "seed"`);
  return spec.seed;
}

export function throwIfAborted(signal?: AbortSignal): void {
  if (signal?.aborted) {
    const e = new Error('the verification run was cancelled');
    e.name = 'AbortError';
    throw e;
  }
}
