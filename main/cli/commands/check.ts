/**
 * `plateau check`: import a spreadsheet (or CSV) export with a mapping template, or with the
 * suggested one, and print the mapping, the summary and every problem.
 */
import * as path from 'node:path';
import { parseArgs, stringFlag, booleanFlag, numberFlag } from '../args.js';
import { checkOutputPath, resolvePath, writeFileAtomic } from '../../services/files.js';
import { CliError, UsageError, type CliCommand } from '../types.js';
import type { ImportOptions, MappingTemplate } from '../../../engine/import/roles.js';
import type { ImportReport } from '../../../engine/import/build.js';
import { importWithMappingFile } from '../../services/spreadsheetDataset.js';
import { ImportError } from '../../services/importService.js';
import { exportDataset, exportReport, reportJson } from '../../services/importExport.js';
import { lookupMolarMass } from '../../../engine/import/values.js';
import { describePlace, formatRows, groupProblems } from '../../../engine/import/group.js';
import { printable } from '../../../engine/text/printable.js';

const usage = `Usage: plateau check --data <file> [options]

Reads a lab / medication-administration export (.xlsx, .xls, .ods, .csv), applies the mapping
template (or suggests one), and lists every problem with sheet, row and column.

Options:
  --data <file>            the export to check (required)
  --mapping <file.json>    mapping template to apply (default: the suggested mapping)
  --report <file>          write the report: .json (mapping, summary, problems), .xlsx or .csv
  --save-mapping <file>    write the mapping used (suggested or refreshed) as a template
  --export-dataset <file>  write the imported dataset as .xlsx or .csv (formulas neutralised)
  --day-first              read text dates like 03/04/2024 as 3 April
  --month-first            read text dates like 03/04/2024 as 4 March
  --decimal-comma          numbers are written 12,5
  --drug <name>            drug name (molar mass looked up for umol/L levels)
  --molar-mass <g/mol>     molar mass of the drug for umol/L or nmol/L levels (1 to 1000000)
  --lloq <mg/L>            LLOQ for levels reported as BLQ/ND without a limit (> 0, at most 1000)
  --default-route <route>  bolus, infusion or oral, for doses without a route
  --clock-changes <rule>   eu (default), us or none: which daylight-saving dates to warn about
  --time-limit <s>         stop parsing after this many seconds (default 60, at most 3600)

Output files are checked (folder exists, writable) before the export is read.

Times are taken as written (ward clock, no time zone). Exit code 0 when there is no error, 1 when
some rows have errors (they are excluded), 2 for wrong usage.`;

const MAX_PRINTED_PROBLEMS = 200;

function printMapping(t: MappingTemplate, out: (s: string) => void): void {
  for (const s of t.sheets) {
    out(printable(`  sheet "${s.sheet}" (${s.content}), header row ${s.headerRow}`) + '\n');
    for (const c of s.columns) {
      if (c.role === 'ignore') continue;
      out(printable(`    ${c.column.padEnd(3)} ${JSON.stringify(c.header).padEnd(28)} -> ${c.role}${c.name ? ` "${c.name}"` : ''}${c.unit ? ` [${c.unit}]` : ''}`) + '\n');
    }
  }
  const o = t.options;
  out(`  options: dates ${o.dateOrder}, decimal ${o.decimalSeparator}, clock changes ${o.clockChanges}${o.molarMassGPerMol ? `, molar mass ${o.molarMassGPerMol} g/mol` : ''}${o.defaultLloqMgL ? `, LLOQ ${o.defaultLloqMgL} mg/L` : ''}\n`);
}

function printReport(report: ImportReport, out: (s: string) => void): void {
  const s = report.summary;
  out(`Summary: ${s.patients} patients, ${s.doses} doses, ${s.levels} levels (${s.censored} censored), ${s.excludedRows} rows excluded\n`);
  for (const n of report.notes) out(printable(`Note: ${n}`) + '\n');
  const errors = report.problems.filter((p) => p.severity === 'error').length;
  out(`Problems: ${errors} error(s), ${report.problems.length - errors} warning(s)\n`);
  // A problem repeated on many rows is one line with the count and the rows. Text from the file
  // is printed with control characters escaped, so a cell cannot forge a line of output.
  const lines = groupProblems(report.problems);
  for (const g of lines.slice(0, MAX_PRINTED_PROBLEMS)) {
    const where = describePlace(g);
    out(printable(`  ${g.severity === 'error' ? 'ERROR  ' : 'warning'} ${where}${where ? ': ' : ''}${g.message}${g.value ? ` [${g.value.slice(0, 60)}]` : ''}`) + '\n');
  }
  if (lines.length > MAX_PRINTED_PROBLEMS) out(`  ... and ${lines.length - MAX_PRINTED_PROBLEMS} more (write them all with --report)\n`);
  if (report.excluded.length > 0) {
    out(`Excluded rows:\n`);
    const reasons = new Map<string, { sheet: string; reason: string; rows: number[] }>();
    for (const x of report.excluded) {
      const k = `${x.sheet}\u0000${x.reason}`;
      const r = reasons.get(k) ?? { sheet: x.sheet, reason: x.reason, rows: [] };
      r.rows.push(x.row);
      reasons.set(k, r);
    }
    const grouped = [...reasons.values()];
    for (const r of grouped.slice(0, MAX_PRINTED_PROBLEMS))
      out(printable(`  ${r.sheet ? `sheet "${r.sheet}" ` : ''}${r.rows.length === 1 ? `row ${r.rows[0]}` : `${r.rows.length} rows (${formatRows(r.rows)})`}: ${r.reason}`) + '\n');
    if (grouped.length > MAX_PRINTED_PROBLEMS) out(`  ... and ${grouped.length - MAX_PRINTED_PROBLEMS} more\n`);
  }
}

export const command: CliCommand = {
  name: 'check',
  summary: 'Check a spreadsheet export: suggested mapping, summary and every problem by row',
  usage,
  async run(argv, io, signal) {
    const args = parseArgs(
      argv,
      {
        data: { type: 'string', required: true },
        mapping: { type: 'string' },
        report: { type: 'string' },
        'save-mapping': { type: 'string' },
        'export-dataset': { type: 'string' },
        'day-first': { type: 'boolean' },
        'month-first': { type: 'boolean' },
        'decimal-comma': { type: 'boolean' },
        drug: { type: 'string' },
        'molar-mass': { type: 'string' },
        lloq: { type: 'string' },
        'default-route': { type: 'string' },
        'clock-changes': { type: 'string' },
        'time-limit': { type: 'string' },
      },
      { usage },
    );
    if (args.help) {
      io.stdout(usage + '\n');
      return 0;
    }
    if (booleanFlag(args, 'day-first') && booleanFlag(args, 'month-first')) throw new UsageError('--day-first and --month-first exclude each other', usage);
    const options: Partial<ImportOptions> = {};
    if (booleanFlag(args, 'day-first')) options.dateOrder = 'dayFirst';
    if (booleanFlag(args, 'month-first')) options.dateOrder = 'monthFirst';
    if (booleanFlag(args, 'decimal-comma')) options.decimalSeparator = 'comma';
    const drug = stringFlag(args, 'drug');
    if (drug !== undefined) {
      options.drug = drug;
      const m = lookupMolarMass(drug);
      if (m !== undefined) options.molarMassGPerMol = m;
    }
    const molar = numberFlag(args, 'molar-mass', { usage });
    if (molar !== undefined) {
      if (!(molar >= 1 && molar <= 1_000_000)) throw new UsageError('--molar-mass must be from 1 to 1000000 (g/mol)', usage);
      options.molarMassGPerMol = molar;
    }
    const lloq = numberFlag(args, 'lloq', { usage });
    if (lloq !== undefined) {
      if (!(lloq > 0 && lloq <= 1000)) throw new UsageError('--lloq must be > 0 and at most 1000 (mg/L)', usage);
      options.defaultLloqMgL = lloq;
    }
    const route = stringFlag(args, 'default-route');
    if (route !== undefined) {
      if (route !== 'bolus' && route !== 'infusion' && route !== 'oral') throw new UsageError('--default-route must be bolus, infusion or oral', usage);
      options.defaultRoute = route;
    }
    const cc = stringFlag(args, 'clock-changes');
    if (cc !== undefined) {
      if (cc !== 'eu' && cc !== 'us' && cc !== 'none') throw new UsageError('--clock-changes must be eu, us or none', usage);
      options.clockChanges = cc;
    }
    const limitS = numberFlag(args, 'time-limit', { usage });
    // Beyond 3600 s a timer would also overflow (Node fires timers over 2^31 ms at once).
    if (limitS !== undefined && !(limitS > 0 && limitS <= 3600)) throw new UsageError('--time-limit must be > 0 and at most 3600 seconds', usage);
    // Output paths are checked before the export is read, so a typo does not cost the parse.
    const outFlags = ['report', 'save-mapping', 'export-dataset'] as const;
    for (const flag of outFlags) {
      const value = stringFlag(args, flag);
      if (value !== undefined) await checkOutputPath(resolvePath(io.cwd, value));
    }

    const dataPath = resolvePath(io.cwd, stringFlag(args, 'data')!);
    const mappingFlag = stringFlag(args, 'mapping');
    const mappingPath = mappingFlag !== undefined ? resolvePath(io.cwd, mappingFlag) : undefined;
    let outcome;
    try {
      outcome = await importWithMappingFile(dataPath, mappingPath, {
        options,
        ...(limitS !== undefined ? { timeLimitMs: limitS * 1000 } : {}),
        ...(signal ? { signal } : {}),
      });
    } catch (e) {
      if (e instanceof ImportError) {
        const extra = e.problems.length ? '\n' + e.problems.map((p) => `  ${p}`).join('\n') : '';
        throw new CliError(printable(e.message + extra));
      }
      throw e;
    }
    const out = io.stdout;
    out(`${path.basename(dataPath)}: ${outcome.preview.length} sheet(s)\n`);
    for (const p of outcome.preview) out(printable(`  "${p.name}": header row ${p.headerRow}, ${p.dataRowCount} data rows, columns ${p.columns.filter((c) => c.type !== 'empty').map((c) => `${c.letter}:${c.type}`).join(' ')}`) + '\n');
    for (const s of outcome.skippedSheets) out(printable(`  left out: ${s}`) + '\n');
    out(outcome.suggested ? 'Suggested mapping (check it; save it with --save-mapping):\n' : 'Mapping:\n');
    printMapping(outcome.mapping, out);
    printReport(outcome.report, out);

    const reportFlag = stringFlag(args, 'report');
    if (reportFlag !== undefined) {
      const file = resolvePath(io.cwd, reportFlag);
      if (path.extname(file).toLowerCase() === '.json') await writeFileAtomic(file, JSON.stringify(reportJson(outcome.report), null, 2) + '\n');
      else await exportReport(outcome.report, file).catch((e: Error) => { throw new CliError(e.message); });
      out(`Report written to ${file}\n`);
    }
    const saveFlag = stringFlag(args, 'save-mapping');
    if (saveFlag !== undefined) {
      const file = resolvePath(io.cwd, saveFlag);
      await writeFileAtomic(file, JSON.stringify(outcome.mapping, null, 2) + '\n');
      out(`Mapping written to ${file}\n`);
    }
    const exportFlag = stringFlag(args, 'export-dataset');
    if (exportFlag !== undefined) {
      if (!outcome.dataset) throw new CliError('no dataset to export: no usable rows');
      const file = resolvePath(io.cwd, exportFlag);
      await exportDataset(outcome.dataset, file).catch((e: Error) => { throw new CliError(e.message); });
      out(`Dataset written to ${file}\n`);
    }
    return outcome.report.problems.some((p) => p.severity === 'error') ? 1 : 0;
  },
};
