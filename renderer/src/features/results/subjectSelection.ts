/**
 * Which subjects the individual-fit views show, and in what order. On screen: dataset order or
 * the worst-fitted first (byLargestIwres). Printed (printedSubjects): up to PRINT_SUBJECTS_MAX, every
 * subject; a larger site's history (thousands of patients) would print thousands of pages and
 * exhaust the browser's canvases, so the report then holds the PRINT_SUBJECTS_MAX subjects whose
 * levels lie furthest from their own fitted curves (largest |IWRES|: the fits a reviewer has to
 * look at), in dataset order, and says so. Every subject stays on screen (Individual fits pages)
 * and every level with its predictions is in the exported workbook (Levels sheet).
 */

/** Most individual fits printed: 100 groups of six, about 35 A4 pages (measured). */
export const PRINT_SUBJECTS_MAX = 600;

export interface PrintSelection {
  /** Subject ids to print, in dataset order. */
  ids: string[];
  /** What was left out and how the printed ones were chosen; null when every subject is printed. */
  note: string | null;
}

type Residuals = ReadonlyArray<{ subject: string; iwres?: number | null }> | undefined;

/**
 * The subjects by their largest |IWRES|, largest first; equal ones (and subjects without a
 * residual, last, with w = -1) in dataset order. k is the dataset position.
 */
export function byLargestIwres(subjectIds: readonly string[], observations: Residuals): Array<{ id: string; k: number; w: number }> {
  const worst = new Map<string, number>();
  for (const o of observations ?? []) {
    const a = typeof o.iwres === 'number' && Number.isFinite(o.iwres) ? Math.abs(o.iwres) : -1;
    if (a > (worst.get(o.subject) ?? -1)) worst.set(o.subject, a);
  }
  return subjectIds.map((id, k) => ({ id, k, w: worst.get(id) ?? -1 })).sort((x, y) => y.w - x.w || x.k - y.k);
}

export function printedSubjects(subjectIds: readonly string[], observations: Residuals, max = PRINT_SUBJECTS_MAX): PrintSelection {
  if (subjectIds.length <= max) return { ids: [...subjectIds], note: null };
  const order = byLargestIwres(subjectIds, observations);
  const chosen = order.slice(0, max).sort((x, y) => x.k - y.k);
  const cut = order[max - 1].w;
  return {
    ids: chosen.map((c) => c.id),
    note:
      `Individual fits of ${max} of the ${subjectIds.length} subjects are printed: those whose levels lie furthest from their own fitted curve ` +
      `(largest absolute IWRES${cut >= 0 ? `, ${cut.toFixed(2)} or more` : ''}), in dataset order. ` +
      'Every subject is in Results, Individual fits, on screen, and every level with its predictions and residuals is in the exported workbook (Levels sheet).',
  };
}
