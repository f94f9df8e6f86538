/**
 * Strict keys for JSON that people write by hand (patient files, model specs, targets, mapping
 * templates, settings): an unknown key is an error naming its JSON path and the nearest known
 * key, so a misspelt "duraton_h" is never silently ignored.
 */

/** Optimal string alignment distance (Damerau-Levenshtein with adjacent transpositions). */
export function editDistance(a: string, b: string): number {
  const m = a.length;
  const n = b.length;
  if (m === 0) return n;
  if (n === 0) return m;
  const d: number[][] = [];
  for (let i = 0; i <= m; i++) {
    d.push(new Array<number>(n + 1).fill(0));
    d[i]![0] = i;
  }
  for (let j = 0; j <= n; j++) d[0]![j] = j;
  for (let i = 1; i <= m; i++) {
    for (let j = 1; j <= n; j++) {
      const cost = a[i - 1] === b[j - 1] ? 0 : 1;
      let best = Math.min(d[i - 1]![j]! + 1, d[i]![j - 1]! + 1, d[i - 1]![j - 1]! + cost);
      if (i > 1 && j > 1 && a[i - 1] === b[j - 2] && a[i - 2] === b[j - 1]) best = Math.min(best, d[i - 2]![j - 2]! + 1);
      d[i]![j] = best;
    }
  }
  return d[m]![n]!;
}

/**
 * The known key nearest to `key`, compared case-insensitively, or undefined when none is close
 * (distance above max(2, a third of the key's length)).
 */
export function nearestKey(key: string, known: readonly string[]): string | undefined {
  const lower = key.toLowerCase();
  let best: string | undefined;
  let bestDistance = Infinity;
  for (const candidate of known) {
    const distance = editDistance(lower, candidate.toLowerCase());
    if (distance < bestDistance) {
      bestDistance = distance;
      best = candidate;
    }
  }
  const limit = Math.max(2, Math.floor(key.length / 3));
  return bestDistance <= limit ? best : undefined;
}

/** JSON path of a key under a parent path: `doses[0]` + `duration_h` -> `doses[0].duration_h`. */
export function childPath(parentPath: string, key: string): string {
  const safe = /^[A-Za-z_$][A-Za-z0-9_$]*$/.test(key) ? key : JSON.stringify(key);
  if (parentPath === '') return safe;
  return safe.startsWith('"') ? `${parentPath}[${safe}]` : `${parentPath}.${safe}`;
}

/**
 * One message per key of `obj` that is not in `known`, e.g.
 * `doses[0].duraton_h: unknown key (did you mean "duration_h"?)`. Prototype keys
 * (`__proto__`, `constructor`, `prototype`) are always unknown.
 */
export function unknownKeyProblems(obj: Record<string, unknown>, known: readonly string[], parentPath = ''): string[] {
  const problems: string[] = [];
  const knownSet = new Set(known);
  for (const key of Object.keys(obj)) {
    const forbidden = key === '__proto__' || key === 'constructor' || key === 'prototype';
    if (!forbidden && knownSet.has(key)) continue;
    const near = forbidden ? undefined : nearestKey(key, known);
    const hint = near !== undefined ? ` (did you mean "${near}"?)` : ` (known keys: ${known.join(', ')})`;
    problems.push(`${childPath(parentPath, key)}: unknown key${hint}`);
  }
  return problems;
}
