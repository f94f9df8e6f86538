/** `plateau verify`: the installation verification suite, with a report to sign. */
import * as path from 'node:path';
import { checkOutputPath, resolvePath, writeFileAtomic } from '../../services/files.js';
import { findChromium, htmlToPdf, PDF_HELP } from '../../verify/pdf.js';
import { renderReportHtml } from '../../verify/reportHtml.js';
import { runVerification } from '../../verify/runner.js';
import { VerifySetupError } from '../../verify/suite.js';
import type { VerificationReport } from '../../verify/types.js';
import { booleanFlag, parseArgs, stringFlag } from '../args.js';
import { CliError, UsageError, type CliCommand } from '../types.js';

const usage = `Usage: plateau verify [--quick] [--out report.pdf|report.html|report.json] [--json]

Checks that this installation computes correctly on this computer: runs a fixed suite of
checks (structural models, the estimator, standard errors and -2LL, dose advice, spreadsheet
import, reproducibility) against reference values shipped in resources/validation, each with
its source and tolerance, and writes a report with the machine, the versions, a SHA-256 of the
installed engine files, and lines for the validating pharmacist's name, signature and date.
  --quick     the short suite (under 30 s on a 2-core PC); without it the full suite (under 3 min)
  --out FILE  write the report: .pdf (needs Chromium: /usr/bin/chromium or PLATEAU_CHROMIUM),
              .html (self-contained, print it from a browser) or .json
  --json      print the JSON report on stdout instead of the summary
Exit status 0 only when every check passes; 1 when any check fails.`;

const FORMATS = new Set(['.pdf', '.html', '.htm', '.json']);

function summaryText(r: VerificationReport): string {
  const w = Math.max(...r.checks.map((c) => c.id.length));
  const lines = r.checks.map((c) => `  ${(c.status === 'pass' ? 'PASS' : c.status === 'fail' ? 'FAIL' : 'NOT RUN').padEnd(7)}  ${c.id.padEnd(w)}  ${c.found}`);
  const s = r.summary;
  const failed = r.checks.filter((c) => c.status === 'fail').map((c) => c.id);
  const banner =
    r.status === 'PASS'
      ? `RESULT: PASS (${s.passed} of ${s.total} checks passed${s.notRun ? `, ${s.notRun} planned not run` : ''})`
      : `RESULT: FAIL *** ${s.failed} of ${s.total} checks FAILED: ${failed.join(', ')} ***`;
  return [
    `${r.title} (${r.mode} suite)`,
    `Plateau ${r.application.version}, engine ${r.application.engineVersion}; engine files SHA-256 ${r.engine.sha256} (${r.engine.fileCount} files)`,
    `${r.machine.os}, ${r.machine.cpuModel}, ${r.machine.cores} cores, ${r.machine.memoryGiB} GiB; ${(r.durationMs / 1000).toFixed(1)} s`,
    '',
    ...lines,
    '',
    banner,
    '',
  ].join('\n');
}

export const command: CliCommand = {
  name: 'verify',
  summary: 'Verify this installation against shipped reference values and write a report to sign',
  usage,
  async run(argv, io, signal) {
    const args = parseArgs(argv, { quick: { type: 'boolean' }, out: { type: 'string', short: 'o' }, json: { type: 'boolean' } }, { usage });
    if (args.help) {
      io.stdout(usage + '\n');
      return 0;
    }
    const out = stringFlag(args, 'out');
    const ext = out ? path.extname(out).toLowerCase() : '';
    if (out && !FORMATS.has(ext)) throw new UsageError(`--out ${out}: the report is written as .pdf, .html or .json (the name says which)`, usage);
    const outPath = out ? resolvePath(io.cwd, out) : undefined;
    // Checked before the suite runs, so a typo in the folder does not cost the run.
    if (outPath) await checkOutputPath(outPath);
    let chromium: string | undefined;
    if (ext === '.pdf') {
      chromium = findChromium();
      if (!chromium) throw new CliError(`cannot write ${out}: no Chromium found (${process.env.PLATEAU_CHROMIUM ? `PLATEAU_CHROMIUM=${process.env.PLATEAU_CHROMIUM} does not exist` : 'looked for /usr/bin/chromium and the usual Chrome and Edge locations'}). ${PDF_HELP}`);
    }
    let report: VerificationReport;
    try {
      report = await runVerification({
        quick: booleanFlag(args, 'quick'),
        ...(signal ? { signal } : {}),
        onProgress: (p) => {
          if (p.phase === 'done') io.stderr(`[${String(p.index).padStart(2)}/${p.total}] ${p.status === 'pass' ? 'PASS   ' : p.status === 'fail' ? 'FAIL   ' : 'NOT RUN'} ${p.id} (${((p.durationMs ?? 0) / 1000).toFixed(2)} s)\n`);
        },
      });
    } catch (e) {
      if (e instanceof VerifySetupError) throw new CliError(e.message);
      if ((e as Error).name === 'AbortError') {
        io.stderr('plateau verify: cancelled; no report written\n');
        return 130;
      }
      throw e;
    }
    if (outPath) {
      if (ext === '.json') await writeFileAtomic(outPath, `${JSON.stringify(report, null, 2)}\n`);
      else if (ext === '.pdf') await writeFileAtomic(outPath, await htmlToPdf(renderReportHtml(report), chromium!));
      else await writeFileAtomic(outPath, renderReportHtml(report));
    }
    if (booleanFlag(args, 'json')) io.stdout(`${JSON.stringify(report, null, 2)}\n`);
    else io.stdout(summaryText(report) + (outPath ? `Report written to ${outPath}\n` : ''));
    return report.status === 'PASS' ? 0 : 1;
  },
};
