/**
 * What kind of Plateau JSON file a parsed object looks like, from the keys each kind must have.
 * Used to say "this looks like a patient file" when a file is given in the wrong place, rather
 * than a confusing error about a missing field.
 */

export type JsonFileKind = 'patient file' | 'model spec' | 'fit.json' | 'target file' | 'advice record' | 'import mapping template';

const isRecord = (x: unknown): x is Record<string, unknown> => typeof x === 'object' && x !== null && !Array.isArray(x);

/** The kind the object's keys point to, or undefined when nothing is recognisable. */
export function jsonFileKind(json: unknown): JsonFileKind | undefined {
  if (!isRecord(json)) return undefined;
  const has = (k: string) => Object.prototype.hasOwnProperty.call(json, k);
  if (has('population') && has('spec')) return 'fit.json';
  if (json.format === 'plateau-import-mapping') return 'import mapping template';
  if (has('status') && (has('regimens') || has('caution'))) return 'advice record';
  if (has('structure') || (has('parameters') && has('residual'))) return 'model spec';
  if (has('doses') || has('levels') || has('next_dose_h') || has('renal')) return 'patient file';
  if (has('goals') || has('toxic')) return 'target file';
  if (json.format === 'plateau-import-mapping' || (has('sheets') && has('options'))) return 'import mapping template';
  return undefined;
}

/**
 * A sentence when `json` looks like another kind than `expected` (e.g. "this looks like a patient
 * file, not a model spec or fit.json"), else undefined.
 */
export function wrongKindMessage(json: unknown, expected: readonly JsonFileKind[]): string | undefined {
  const kind = jsonFileKind(json);
  if (kind === undefined || expected.includes(kind)) return undefined;
  return `this looks like ${kind === 'fit.json' ? 'a fit.json' : /^[aeiou]/.test(kind) ? `an ${kind}` : `a ${kind}`}, not ${expected.map((k) => (k === 'fit.json' ? 'a fit.json' : /^[aeiou]/.test(k) ? `an ${k}` : `a ${k}`)).join(' or ')}`;
}
