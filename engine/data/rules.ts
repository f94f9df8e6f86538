/**
 * The dataset rules both readers apply: the canonical CSV (canonicalCsv.ts) and the spreadsheet
 * import (engine/import/build.ts). One set of rules and messages, so a dataset is valid for
 * `check`, `fit`, `simulate` and the app alike, or for none of them.
 */

/** Words read as "censored" and as "not censored". Anything else is an error, never a guess. */
const CENSORED_YES: ReadonlySet<string> = new Set(['1', 'true', 'yes', 'y', 'x', 'ja', 'oui']);
const CENSORED_NO: ReadonlySet<string> = new Set(['', '0', 'false', 'no', 'n', 'nein', 'non']);

export type FlagResult = { ok: true; value: boolean } | { ok: false; message: string };

/** A censored flag: 1 / true / yes (censored), 0 / false / no / empty (not); anything else an error. */
export function parseCensoredFlag(text: string): FlagResult {
  const t = text.trim().toLowerCase();
  if (CENSORED_YES.has(t)) return { ok: true, value: true };
  if (CENSORED_NO.has(t)) return { ok: true, value: false };
  return {
    ok: false,
    message: `the censored flag "${text.trim().slice(0, 40)}" is not 1, 0, true, false, yes, no or empty: write 1 for a level below the LLOQ and 0 (or nothing) for a measured level`,
  };
}

/** Identity of an event for the duplicate rule: same subject, kind, time and value. */
export function doseKey(timeH: number, amountMg: number, route: string, durationH: number): string {
  return `d|${timeH}|${amountMg}|${route}|${durationH}`;
}
export function levelKey(timeH: number, valueMgL: number, censored: boolean): string {
  return `l|${timeH}|${valueMgL}|${censored}`;
}

/**
 * The duplicate rule: a second row with the same subject, kind, time and value is an error
 * (an export that lists every row twice would otherwise double every dose).
 */
export function duplicateMessage(kind: 'dose' | 'level', firstWhere: string): string {
  return `duplicate of ${firstWhere} (same patient, time and ${kind}): remove one of them`;
}

/** The first-dose rule: a measured level before a patient's first dose cannot be explained by the doses. */
export function levelBeforeFirstDoseMessage(subject: string, firstDoseWhere: string | undefined): string {
  return firstDoseWhere
    ? `the level is before the first dose of patient ${subject} (${firstDoseWhere}): check the time, or add the missing dose`
    : `patient ${subject} has no dose rows, so the level cannot be explained: add the doses, or remove the patient`;
}

/** A censored level before the first dose is kept (a pre-dose level below the LLOQ): a note only. */
export function censoredBeforeFirstDoseMessage(subject: string, firstDoseWhere: string): string {
  return `the level is before the first dose of patient ${subject} (${firstDoseWhere}); kept as a pre-dose level below the LLOQ`;
}

/**
 * A cell "<x" (below a stated limit) and the row's own censored flag or LLOQ must agree. A flag
 * saying "measured" contradicts the cell: an error, nobody can tell which is right. A different
 * LLOQ: a warning, and the limit the cell states is used (it is the laboratory's word for this
 * sample; the wider interval is the cautious reading).
 */
export function censoredDisagreement(
  statedLimit: number | undefined,
  flag: boolean | undefined,
  lloq: number | undefined,
): { severity: 'error' | 'warning'; message: string } | undefined {
  if (flag === false)
    return { severity: 'error', message: 'the level is written as below a limit but the row\'s censored flag says it was measured (0): correct one of them' };
  if (statedLimit !== undefined && lloq !== undefined && Math.abs(statedLimit - lloq) > 1e-9 * Math.max(1, Math.abs(lloq)))
    return { severity: 'warning', message: `the level is written as below ${statedLimit} but the row's LLOQ is ${lloq}: the limit written in the cell (${statedLimit}) is used; check which is right` };
  return undefined;
}

/** The text-file damage rule: a file whose last line has no line break may have been cut short. */
export function lastLineMessage(line: number): string {
  return `the last line (line ${line}) does not end with a line break, so the file may have been cut short: compare the last row with the source, then add a line break at the end of the file`;
}
