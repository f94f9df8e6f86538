/**
 * One line per problem that repeats: a missing role or unit is reported on every row it
 * touches, which buried the report in hundreds of identical lines. Rows are kept (the report
 * file still lists each one); printing groups them with the count and the rows.
 */
import type { ReportProblem } from './roles.js';

export interface ProblemLine {
  severity: 'error' | 'warning';
  sheet: string;
  column: string;
  message: string;
  /** Rows as the spreadsheet numbers them, ascending; 0 when not tied to a row. */
  rows: number[];
  /** The cell value when every row has the same one, else ''. */
  value: string;
}

/** Group problems with the same severity, sheet, column and message (in first-seen order). */
export function groupProblems(problems: readonly ReportProblem[]): ProblemLine[] {
  const byKey = new Map<string, ProblemLine & { values: Set<string> }>();
  for (const p of problems) {
    const key = `${p.severity}\u0000${p.sheet}\u0000${p.column}\u0000${p.message}`;
    let g = byKey.get(key);
    if (!g) {
      g = { severity: p.severity, sheet: p.sheet, column: p.column, message: p.message, rows: [], value: p.value, values: new Set() };
      byKey.set(key, g);
    }
    g.rows.push(p.row);
    g.values.add(p.value);
  }
  return [...byKey.values()].map(({ values, ...g }) => ({ ...g, rows: [...new Set(g.rows)].sort((a, b) => a - b), value: values.size === 1 ? g.value : '' }));
}

/** "2-40, 42, 45-60", at most `maxParts` ranges, then "...". */
export function formatRows(rows: readonly number[], maxParts = 8): string {
  const parts: string[] = [];
  let i = 0;
  const sorted = rows.filter((r) => r > 0);
  while (i < sorted.length) {
    let j = i;
    while (j + 1 < sorted.length && sorted[j + 1] === sorted[j] + 1) j++;
    parts.push(i === j ? String(sorted[i]) : `${sorted[i]}-${sorted[j]}`);
    i = j + 1;
  }
  return parts.length > maxParts ? `${parts.slice(0, maxParts).join(', ')}, ...` : parts.join(', ');
}

/** Where a problem line is, in words: sheet, row(s) with the count, column. */
export function describePlace(line: ProblemLine): string {
  const rows = line.rows.filter((r) => r > 0);
  const rowText = rows.length === 0 ? '' : rows.length === 1 ? `row ${rows[0]}` : `${rows.length} rows (${formatRows(rows)})`;
  return [line.sheet ? `sheet "${line.sheet}"` : '', rowText, line.column ? `column ${line.column}` : ''].filter(Boolean).join(', ');
}
