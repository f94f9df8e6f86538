/**
 * Published population models in the model spec (`literature` block): the full citation, the
 * population the model was built on, where the values in the file come from, and the record of
 * a named user who checked every value against the publication. A model whose values have not
 * been verified (or were changed after verification) must not give dose advice.
 */
import { unknownKeyProblems } from '../json/knownKeys.js';

export const UNVERIFIED_TEXT = 'unverified: check every value against the publication';

export interface LiteratureVerification {
  /** Name of the person who checked every value against the publication. */
  by: string;
  /** Date of the check, YYYY-MM-DD. */
  date: string;
  /** Fingerprint of the values checked (valuesFingerprint): a later edit voids the verification. */
  values: string;
}

export interface LiteratureInfo {
  drug: string;
  /** Full citation: authors, title, journal, year, volume, pages. */
  citation: string;
  /** The population the model was built on (patients, size, setting). */
  population: string;
  /** "memory" when the values were typed from memory, "publication" when read from the paper. */
  valuesFrom: 'memory' | 'publication';
  /** Always "unverified: check every value against the publication" until verified. */
  status: string;
  notes: string[];
  verified?: LiteratureVerification;
}

export const LITERATURE_KEYS = ['drug', 'citation', 'population', 'valuesFrom', 'status', 'notes', 'verified'] as const;
export const VERIFIED_KEYS = ['by', 'date', 'values'] as const;

const isRecord = (x: unknown): x is Record<string, unknown> => typeof x === 'object' && x !== null && !Array.isArray(x);
const text = (x: unknown): x is string => typeof x === 'string' && x.trim().length > 0;

export function parseLiterature(raw: unknown, problems: string[]): LiteratureInfo | undefined {
  if (!isRecord(raw)) {
    problems.push('literature: must be an object {drug, citation, population, valuesFrom, status, notes, verified?}');
    return undefined;
  }
  problems.push(...unknownKeyProblems(raw, LITERATURE_KEYS, 'literature'));
  for (const k of ['drug', 'citation', 'population', 'status'] as const) if (!text(raw[k])) problems.push(`literature.${k}: must be text`);
  if (raw.valuesFrom !== 'memory' && raw.valuesFrom !== 'publication') problems.push('literature.valuesFrom: must be "memory" or "publication"');
  const notes = raw.notes ?? [];
  if (!(Array.isArray(notes) && notes.every(text))) problems.push('literature.notes: must be a list of text');
  let verified: LiteratureVerification | undefined;
  if (raw.verified !== undefined && raw.verified !== null) {
    const v = raw.verified;
    if (!isRecord(v)) problems.push('literature.verified: must be {by, date, values}');
    else {
      problems.push(...unknownKeyProblems(v, VERIFIED_KEYS, 'literature.verified'));
      if (!text(v.by)) problems.push('literature.verified.by: the name of the person who verified the values');
      if (!(typeof v.date === 'string' && /^\d{4}-\d{2}-\d{2}$/.test(v.date))) problems.push('literature.verified.date: YYYY-MM-DD');
      if (!text(v.values)) problems.push('literature.verified.values: the fingerprint written by plateau models --verify');
      if (text(v.by) && typeof v.date === 'string' && text(v.values)) verified = { by: v.by, date: v.date, values: v.values };
    }
  }
  if (!text(raw.drug) || !text(raw.citation) || !text(raw.population) || !text(raw.status)) return undefined;
  return {
    drug: raw.drug,
    citation: raw.citation,
    population: raw.population,
    valuesFrom: raw.valuesFrom === 'publication' ? 'publication' : 'memory',
    status: raw.status,
    notes: Array.isArray(notes) ? notes.filter(text) : [],
    ...(verified ? { verified } : {}),
  };
}

/** Canonical JSON: object keys sorted, so the fingerprint does not depend on key order. */
function canonical(x: unknown): string {
  if (Array.isArray(x)) return `[${x.map(canonical).join(',')}]`;
  if (isRecord(x)) return `{${Object.keys(x).sort().map((k) => `${JSON.stringify(k)}:${canonical(x[k])}`).join(',')}}`;
  return JSON.stringify(x) ?? 'null';
}

/**
 * Fingerprint (FNV-1a, 64 bits as two 32-bit halves) of the values that make the model: structure,
 * parameters, covariates, correlations, residual and covariate ranges of the parsed spec (defaults
 * filled in, so layout and key order do not matter).
 */
export function valuesFingerprint(spec: object): string {
  const src = spec as Record<string, unknown>;
  const picked: Record<string, unknown> = {};
  for (const k of ['structure', 'parameters', 'covariates', 'correlations', 'correlationValues', 'residual', 'covariateRanges']) picked[k] = src[k] ?? null;
  const s = canonical(picked);
  let h1 = 0x811c9dc5;
  let h2 = 0x01000193 ^ 0x5bd1e995;
  for (let i = 0; i < s.length; i++) {
    const c = s.charCodeAt(i);
    h1 = Math.imul(h1 ^ c, 0x01000193) >>> 0;
    h2 = Math.imul(h2 ^ c, 0x5bd1e995) >>> 0;
  }
  return `fnv1a:${h1.toString(16).padStart(8, '0')}${h2.toString(16).padStart(8, '0')}`;
}

/** Verified when a verification is recorded and the values still match what was verified. */
export function literatureStatus(info: LiteratureInfo, spec: object): { verified: boolean; reason: string } {
  if (!info.verified) return { verified: false, reason: `${UNVERIFIED_TEXT} (values ${info.valuesFrom === 'memory' ? 'typed from memory' : 'copied from the publication'}, not yet verified by a named user)` };
  if (info.verified.values !== valuesFingerprint(spec))
    return { verified: false, reason: `the values were changed after ${info.verified.by} verified them on ${info.verified.date}; ${UNVERIFIED_TEXT} again` };
  return { verified: true, reason: `values verified against the publication by ${info.verified.by} on ${info.verified.date}` };
}
