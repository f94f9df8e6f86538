/**
 * The whole import in one call, as the worker runs it: bytes -> preview, mapping (given or
 * suggested), dataset and report. The result is plain data (no class instances) so it can cross
 * a process boundary.
 */
import { readWorkbook, previewWorkbook, type ReadOptions, type SheetPreview } from './workbook.js';
import { suggestMapping, parseTemplate, type ImportOptions, type MappingTemplate } from './roles.js';
import { importWorkbook, type ImportReport } from './build.js';
import { DataError, type Dataset } from '../data/types.js';
import { isCanonicalCsv, parseCanonicalCsvDetailed } from '../data/canonicalCsv.js';

export { isCanonicalCsv };
import { decodeTextChecked } from './workbook.js';
import type { ReportProblem } from './roles.js';

export interface AnalyseOptions extends ReadOptions {
  /** A template to apply (parsed JSON, validated here); without one the suggestion is used. */
  mapping?: unknown;
  /** Overrides of the template's options (e.g. --day-first, --molar-mass). */
  options?: Partial<ImportOptions>;
}

export interface Analysis {
  preview: SheetPreview[];
  /** The mapping used (the given one refreshed to this file, or the suggestion). */
  mapping: MappingTemplate;
  suggested: boolean;
  /** Sheets left out of a suggestion, with the reason. */
  skippedSheets: string[];
  dataset: Dataset | undefined;
  report: ImportReport;
}

export function analyseWorkbook(bytes: Uint8Array, options: AnalyseOptions = {}): Analysis {
  const model = readWorkbook(bytes, options);
  const preview = previewWorkbook(model);
  let template: MappingTemplate;
  let skippedSheets: string[] = [];
  let unimported: ReturnType<typeof suggestMapping>['unimported'] = [];
  const suggested = options.mapping === undefined;
  const overrides = options.options ? stripUndefined(options.options) : {};
  if (suggested) {
    const s = suggestMapping(model, overrides);
    template = s.template;
    skippedSheets = s.skipped;
    unimported = s.unimported;
  } else {
    template = parseTemplate(options.mapping);
    template = { ...template, options: { ...template.options, ...overrides } };
  }
  // Overrides come from flags or a message: validate them like a template's options.
  if (template.sheets.length > 0) template = parseTemplate(JSON.parse(JSON.stringify(template)));
  if (model.format === 'csv' && options.mapping === undefined) {
    const decoded = decodeTextChecked(bytes);
    if (isCanonicalCsv(decoded.text)) return analyseCanonical(decoded.text, preview, template, skippedSheets, decoded.damage);
  }
  if (template.sheets.length === 0) {
    const report: ImportReport = {
      mapping: template,
      summary: { patients: 0, doses: 0, levels: 0, censored: 0, excludedRows: 0 },
      problems: [{ sheet: '', row: 0, column: '', value: '', severity: 'error', message: `no sheet with a patient id and doses, levels or covariates was recognised (${skippedSheets.join('; ') || 'the file has no data'}): make a mapping by hand` }],
      excluded: [],
      notes: skippedSheets.map((s) => `Left out: ${s}.`),
    };
    for (const d of model.damage ?? []) report.problems.push({ sheet: d.sheet, row: d.row ?? 0, column: '', value: '', severity: 'error', message: `damaged file: ${d.message}` });
    listUnimported(report, unimported);
    return { preview, mapping: template, suggested, skippedSheets, dataset: undefined, report };
  }
  const result = importWorkbook(model, template);
  // Sheets the suggestion left out are named in the report too, with the reason.
  for (const s of skippedSheets) result.report.notes.push(`Left out: ${s}.`);
  listUnimported(result.report, unimported);
  return { preview, mapping: result.report.mapping, suggested, skippedSheets, dataset: result.dataset, report: result.report };
}

const OPTION_KEYS: readonly (keyof ImportOptions)[] = ['dateOrder', 'decimalSeparator', 'drug', 'molarMassGPerMol', 'defaultLloqMgL', 'defaultRoute', 'clockChanges', 'maxGapH', 'excludeCommentWords'];

/** Only known option keys, and only those given; the values are checked by parseTemplate below. */
function stripUndefined(o: Partial<ImportOptions>): Partial<ImportOptions> {
  const out: Record<string, unknown> = {};
  for (const k of OPTION_KEYS) if (Object.prototype.hasOwnProperty.call(o, k) && o[k] !== undefined) out[k] = o[k];
  return out as Partial<ImportOptions>;
}

/** Rows of a sheet with doses or levels that the suggestion could not map: an error, and every row listed. */
function listUnimported(report: ImportReport, unimported: ReturnType<typeof suggestMapping>['unimported']): void {
  for (const u of unimported) {
    report.problems.push({ sheet: u.sheet.name, row: u.headerIndex + 1, column: '', value: '', severity: 'error', message: u.reason.replace(/^sheet "[^"]*": /, '') });
    for (let r = u.headerIndex + 1; r < u.sheet.rows.length; r++)
      if ((u.sheet.rows[r] ?? []).some((c) => c !== undefined && c.text.trim() !== '')) {
        report.excluded.push({ sheet: u.sheet.name, row: r + 1, reason: 'sheet not imported: no patient id column' });
        report.summary.excludedRows++;
      }
  }
}

/**
 * A canonical CSV is read by the canonical reader, the one `fit` and `simulate` use, so `check`
 * and those commands accept and refuse the same files with the same messages.
 */
function analyseCanonical(text: string, preview: Analysis['preview'], suggestion: MappingTemplate, skippedSheets: string[], encodingDamage?: { line: number; message: string }): Analysis {
  const notes = [
    "The file is Plateau's canonical CSV (columns subject, time_h, event): it is read by the same reader as fit and simulate, with the same rules. The mapping shown is only a starting point if you save one.",
  ];
  const base = { preview, mapping: suggestion, suggested: true, skippedSheets };
  try {
    const r = parseCanonicalCsvDetailed(text, encodingDamage);
    let doses = 0;
    let levels = 0;
    let censored = 0;
    for (const s of r.dataset.subjects) {
      doses += s.doses.length;
      levels += s.observations.length;
      for (const o of s.observations) if (o.censored) censored++;
    }
    if (r.skippedGridRows > 0) notes.push(`${r.skippedGridRows} row(s) marked grid = 1 (simulated curve points) are not data and were skipped.`);
    return {
      ...base,
      dataset: r.dataset,
      report: { mapping: suggestion, summary: { patients: r.dataset.subjects.length, doses, levels, censored, excludedRows: 0 }, problems: [], excluded: [], notes },
    };
  } catch (e) {
    if (!(e instanceof DataError)) throw e;
    const problems: ReportProblem[] = e.problems.map((p) => ({
      sheet: '',
      row: p.row ?? 0,
      column: p.field ?? '',
      value: '',
      severity: 'error',
      message: `${p.subject !== undefined ? `subject ${p.subject}: ` : ''}${p.message}`,
    }));
    const rows = new Set(problems.filter((p) => p.row > 0).map((p) => p.row));
    return {
      ...base,
      dataset: undefined,
      report: {
        mapping: suggestion,
        summary: { patients: 0, doses: 0, levels: 0, censored: 0, excludedRows: rows.size },
        problems,
        excluded: [...rows].sort((a, b) => a - b).map((row) => ({ sheet: '', row, reason: 'see the problems on this line; the file is refused until they are fixed' })),
        notes,
      },
    };
  }
}
