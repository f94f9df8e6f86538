/**
 * The whole import in one call, as the worker runs it: bytes -> preview, mapping (given or
 * suggested), dataset and report. The result is plain data (no class instances) so it can cross
 * a process boundary.
 */
import { readWorkbook, previewWorkbook, type ReadOptions, type SheetPreview } from './workbook.js';
import { suggestMapping, parseTemplate, type ImportOptions, type MappingTemplate } from './roles.js';
import { importWorkbook, type ImportReport } from './build.js';
import type { Dataset } from '../data/types.js';

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
  if (template.sheets.length === 0) {
    const report: ImportReport = {
      mapping: template,
      summary: { patients: 0, doses: 0, levels: 0, censored: 0, excludedRows: 0 },
      problems: [{ sheet: '', row: 0, column: '', value: '', severity: 'error', message: `no sheet with a patient id and doses, levels or covariates was recognised (${skippedSheets.join('; ') || 'the file has no data'}): make a mapping by hand` }],
      excluded: [],
      notes: skippedSheets.map((s) => `Left out: ${s}.`),
    };
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
