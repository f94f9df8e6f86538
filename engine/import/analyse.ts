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
  const suggested = options.mapping === undefined;
  if (suggested) {
    const s = suggestMapping(model, options.options);
    template = s.template;
    skippedSheets = s.skipped;
  } else {
    template = parseTemplate(options.mapping);
    if (options.options) template = { ...template, options: { ...template.options, ...stripUndefined(options.options) } };
  }
  if (template.sheets.length === 0) {
    const report: ImportReport = {
      mapping: template,
      summary: { patients: 0, doses: 0, levels: 0, censored: 0, excludedRows: 0 },
      problems: [{ sheet: '', row: 0, column: '', value: '', severity: 'error', message: `no sheet with a patient id and doses, levels or covariates was recognised (${skippedSheets.join('; ') || 'the file has no data'}): make a mapping by hand` }],
      excluded: [],
      notes: [],
    };
    return { preview, mapping: template, suggested, skippedSheets, dataset: undefined, report };
  }
  const result = importWorkbook(model, template);
  return { preview, mapping: result.report.mapping, suggested, skippedSheets, dataset: result.dataset, report: result.report };
}

function stripUndefined<T extends object>(o: T): Partial<T> {
  const out: Partial<T> = {};
  for (const k of Object.keys(o) as (keyof T)[]) if (o[k] !== undefined) out[k] = o[k];
  return out;
}
