/**
 * The verification report as one self-contained HTML document (no scripts, no external files)
 * with print CSS for A4. The same string is printed to PDF by Chromium: Electron's printToPDF
 * in the app, headless Chromium for `plateau verify --out report.pdf` (pdf.ts).
 */
import type { CheckResult, CheckRow, VerificationReport } from './types.js';

const escapeHtml = (s: string): string => s.replace(/[&<>"']/g, (c) => ({ '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;', "'": '&#39;' })[c]!);

const num = (x: number | string): string => {
  if (typeof x === 'string') return x;
  if (!Number.isFinite(x)) return String(x);
  if (x === 0) return '0';
  const a = Math.abs(x);
  return a >= 1e5 || a < 1e-3 ? x.toExponential(4) : Number(x.toPrecision(7)).toString();
};

const STATUS_LABEL = { pass: 'PASS', fail: 'FAIL', 'not-run': 'NOT RUN' } as const;

const badge = (status: CheckResult['status'] | 'row-pass' | 'row-fail'): string => {
  const s = status === 'row-pass' ? 'pass' : status === 'row-fail' ? 'fail' : status;
  return `<span class="badge ${s}">${STATUS_LABEL[s]}</span>`;
};

const seconds = (ms: number): string => `${(ms / 1000).toFixed(ms < 10_000 ? 2 : 1)} s`;

/** Date and time as written on this PC's clock, with the UTC offset, e.g. 2026-12-04 14:05:09 (UTC+01:00). */
export function localDateTime(iso: string): string {
  const d = new Date(iso);
  const p = (n: number) => String(n).padStart(2, '0');
  const off = -d.getTimezoneOffset();
  const sign = off >= 0 ? '+' : '-';
  return `${d.getFullYear()}-${p(d.getMonth() + 1)}-${p(d.getDate())} ${p(d.getHours())}:${p(d.getMinutes())}:${p(d.getSeconds())} (UTC${sign}${p(Math.floor(Math.abs(off) / 60))}:${p(Math.abs(off) % 60)})`;
}

function rowsTable(rows: CheckRow[]): string {
  if (rows.length === 0) return '';
  const body = rows
    .map(
      (r) =>
        `<tr class="${r.pass ? '' : 'failed'}"><td>${escapeHtml(r.quantity)}</td><td class="n">${escapeHtml(num(r.reference))}</td><td class="n">${escapeHtml(num(r.found))}</td><td class="n">${r.error === undefined ? '' : escapeHtml(num(r.error))}</td><td>${escapeHtml(r.limit ?? '')}</td><td>${badge(r.pass ? 'row-pass' : 'row-fail')}</td></tr>`,
    )
    .join('\n');
  return `<table class="rows"><colgroup><col class="c1"><col class="c2"><col class="c3"><col class="c4"><col class="c5"><col class="c6"></colgroup><thead><tr><th>Quantity</th><th>Reference</th><th>Found</th><th>Error</th><th>Limit</th><th>Result</th></tr></thead><tbody>\n${body}\n</tbody></table>`;
}

function checkDetail(c: CheckResult, i: number): string {
  return `<section class="check ${c.status}">
<h3>${i + 1}. ${escapeHtml(c.id)} ${badge(c.status)}</h3>
<dl>
<dt>Check</dt><dd>${escapeHtml(c.title)}</dd>
<dt>Purpose</dt><dd>${escapeHtml(c.purpose)}</dd>
<dt>Source</dt><dd>${escapeHtml(c.source)}</dd>
<dt>Reference file</dt><dd><code>${escapeHtml(c.reference.file)}</code>${c.reference.sha256 ? ` (SHA-256 <code>${c.reference.sha256}</code>)` : ''}</dd>
<dt>Tolerance</dt><dd>${escapeHtml(c.tolerance)}</dd>
<dt>Found</dt><dd>${escapeHtml(c.found)}</dd>
<dt>Time</dt><dd>${seconds(c.durationMs)}</dd>
</dl>
${rowsTable(c.rows)}
</section>`;
}

const CSS = `
@page { size: A4; margin: 16mm 14mm 18mm 14mm;
  @bottom-left { content: "__FOOTER__"; font: 7.5pt system-ui, sans-serif; color: #444; }
  @bottom-right { content: "Page " counter(page) " of " counter(pages); font: 7.5pt system-ui, sans-serif; color: #444; } }
* { box-sizing: border-box; }
html { -webkit-print-color-adjust: exact; print-color-adjust: exact; }
body { font: 9.5pt/1.4 system-ui, "Segoe UI", "DejaVu Sans", Arial, sans-serif; color: #111; margin: 0; }
h1 { font-size: 17pt; margin: 0 0 1mm; }
h2 { font-size: 12pt; margin: 7mm 0 2mm; border-bottom: 1.5px solid #333; padding-bottom: 1mm; break-after: avoid; }
h3 { font-size: 10pt; margin: 0 0 1.5mm; display: flex; gap: 3mm; align-items: center; justify-content: space-between; }
.sub { color: #333; margin: 0 0 4mm; }
.verdict { border: 3px solid; padding: 3mm 5mm; margin: 3mm 0 2mm; display: flex; align-items: center; gap: 6mm; break-inside: avoid; }
.verdict .word { font-size: 28pt; font-weight: 800; letter-spacing: 0.06em; }
.verdict.PASS { border-color: #1d6b2f; background: #eaf6ec; color: #124a20; }
.verdict.FAIL { border-color: #b00020; background: #fdecee; color: #8a0019; border-width: 5px; }
.verdict p { margin: 0; font-size: 10.5pt; }
table { border-collapse: collapse; width: 100%; margin: 1mm 0 2mm; table-layout: fixed; }
th, td { border: 0.6px solid #999; padding: 1mm 1.5mm; text-align: left; vertical-align: top; overflow-wrap: anywhere; }
th { background: #eee; font-weight: 600; }
thead { display: table-header-group; }
tr { break-inside: avoid; }
td.n { font-variant-numeric: tabular-nums; }
table.env th { width: 42mm; }
table.summary { font-size: 8.5pt; }
table.summary col.c1 { width: 27%; } table.summary col.c2 { width: 23%; } table.summary col.c3 { width: 22%; } table.summary col.c4 { width: 20%; } table.summary col.c5 { width: 8%; }
table.rows col.c1 { width: 34%; } table.rows col.c2, table.rows col.c3 { width: 14%; } table.rows col.c4 { width: 10%; } table.rows col.c5 { width: 19%; } table.rows col.c6 { width: 9%; }
table.files code { font-size: 7.2pt; } table.files col.c1 { width: 34%; }
table.rows { font-size: 8pt; }
tr.failed td { background: #fdecee; }
code { font: 8pt ui-monospace, "DejaVu Sans Mono", monospace; word-break: break-all; }
.badge { display: inline-block; font-weight: 700; font-size: 8pt; padding: 0.2mm 1.5mm; border: 1px solid; white-space: nowrap; }
.badge.pass { color: #124a20; border-color: #1d6b2f; background: #eaf6ec; }
.badge.fail { color: #fff; border-color: #8a0019; background: #b00020; }
.badge.not-run { color: #444; border-color: #888; background: #f2f2f2; }
section.check { border: 0.6px solid #999; padding: 2mm 3mm; margin: 0 0 3mm; }
section.check h3, section.check dl { break-inside: avoid; break-after: avoid; }
section.check.fail { border: 2px solid #b00020; }
dl { display: grid; grid-template-columns: 28mm 1fr; gap: 0.6mm 3mm; margin: 0 0 1.5mm; }
dt { font-weight: 600; }
dd { margin: 0; }
.sign { break-inside: avoid; }
.sign table td { height: 12mm; }
.sign table th { width: 60mm; }
.annex { break-before: page; }
.small { font-size: 8pt; color: #333; }
@media screen { body { padding: 10mm; max-width: 200mm; margin: 0 auto; } }
`;

/** The whole report as a standalone HTML document. */
export function renderReportHtml(report: VerificationReport): string {
  const failed = report.checks.filter((c) => c.status === 'fail');
  const notRun = report.checks.filter((c) => c.status === 'not-run');
  const s = report.summary;
  const verdictText =
    report.status === 'PASS'
      ? `All ${s.passed} checks that ran passed${s.notRun ? ` (${s.notRun} planned check${s.notRun > 1 ? 's' : ''} not yet part of the suite)` : ''}.`
      : `${s.failed} of ${s.total} checks FAILED: ${failed.map((c) => escapeHtml(c.id)).join(', ') || 'no check passed'}.`;
  const env: [string, string][] = [
    ['Application', `${escapeHtml(report.application.name)} ${escapeHtml(report.application.version)}`],
    ['Engine version', escapeHtml(report.application.engineVersion)],
    ['Engine files SHA-256', `<code>${report.engine.sha256}</code><br><span class="small">${report.engine.fileCount} files, ${escapeHtml(report.engine.pattern)}, in <code>${escapeHtml(report.engine.directory)}</code>. Recompute: <code>${escapeHtml(report.engine.recompute)}</code></span>`],
    ['Operating system', `${escapeHtml(report.machine.os)}, ${escapeHtml(report.machine.arch)}`],
    ['Computer name', escapeHtml(report.machine.hostname)],
    ['Processor', `${escapeHtml(report.machine.cpuModel)}, ${report.machine.cores} logical cores`],
    ['Memory', `${report.machine.memoryGiB} GiB`],
    ['Runtime', `Node.js ${escapeHtml(report.machine.node)}`],
    ['Validation set', `<code>${escapeHtml(report.validationSet.directory)}</code> (${report.validationSet.files.length} reference files, hashes in Annex B)`],
    ['Suite', `${report.mode === 'quick' ? 'quick suite' : 'full suite'}: ${s.total} checks`],
    ['Started', escapeHtml(localDateTime(report.startedAt))],
    ['Finished', escapeHtml(localDateTime(report.finishedAt))],
    ['Time taken', seconds(report.durationMs)],
  ];
  const summaryRows = report.checks
    .map(
      (c, i) =>
        `<tr class="${c.status === 'fail' ? 'failed' : ''}"><td>${i + 1}. <b>${escapeHtml(c.id)}</b><br>${escapeHtml(c.title)}</td><td>${escapeHtml(c.source)}</td><td>${escapeHtml(c.tolerance)}</td><td>${escapeHtml(c.found)}</td><td>${badge(c.status)}</td></tr>`,
    )
    .join('\n');
  const conclusion =
    report.status === 'PASS'
      ? `<p>Every check that ran reproduced its independent reference within the stated tolerance on the computer described in section 2, with the engine files identified by the SHA-256 above. On this evidence the installation computes as specified.${notRun.length ? ` Not run (planned, not yet part of the suite): ${notRun.map((c) => escapeHtml(c.id)).join(', ')}.` : ''}</p>`
      : `<p><b>The installation FAILED verification.</b> The failing checks are: ${failed.map((c) => `<b>${escapeHtml(c.id)}</b> (${escapeHtml(c.found)})`).join('; ')}. Do not use this installation for patient care until the cause is found and a repeated verification passes. Keep this report with the incident record and send it to the supplier.</p>`;
  const signRows = [];
  for (let i = 0; i < report.signOff.length; i++) signRows.push(`<tr><th>${escapeHtml(report.signOff[i])}</th><td></td></tr>`);
  const files = report.validationSet.files.map((f) => `<tr><td><code>${escapeHtml(f.path)}</code></td><td><code>${f.sha256}</code></td></tr>`).join('\n');
  const footer = `Plateau ${report.application.version} verification, ${report.status}, ${report.startedAt.slice(0, 10)}, engine ${report.engine.sha256.slice(0, 16)}`;
  return `<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>${escapeHtml(report.title)}: ${report.status}</title>
<style>${CSS.replace('__FOOTER__', footer.replace(/["\\<>]/g, ''))}</style>
</head>
<body>
<h1>${escapeHtml(report.title)}</h1>
<p class="sub">Installation and operational verification of ${escapeHtml(report.application.name)} ${escapeHtml(report.application.version)} (engine ${escapeHtml(report.application.engineVersion)}) on ${escapeHtml(report.machine.hostname)}, ${escapeHtml(localDateTime(report.startedAt))}; ${report.mode} suite.</p>
<div class="verdict ${report.status}"><span class="word">${report.status}</span><p>${verdictText}</p></div>

<h2>1. Scope</h2>
<p>${escapeHtml(report.scope)}</p>
<p>This run: the ${report.mode} suite, ${s.total} checks (${s.passed} passed, ${s.failed} failed, ${s.notRun} not run). A check passes when every compared quantity lies within its tolerance; the run passes when every check that ran passes. The reference values are read from the shipped validation set, never from the program being checked.</p>

<h2>2. Environment</h2>
<table class="env"><tbody>
${env.map(([k, v]) => `<tr><th>${k}</th><td>${v}</td></tr>`).join('\n')}
</tbody></table>

<h2>3. Checks</h2>
<table class="summary"><colgroup><col class="c1"><col class="c2"><col class="c3"><col class="c4"><col class="c5"></colgroup><thead><tr><th>Check</th><th>Source of the reference</th><th>Tolerance</th><th>Value found</th><th>Result</th></tr></thead><tbody>
${summaryRows}
</tbody></table>
<p class="small">Each check's purpose, reference file and every compared quantity are in Annex A.</p>

<h2>4. Conclusion</h2>
<div class="verdict ${report.status}"><span class="word">${report.status}</span><p>${verdictText}</p></div>
${conclusion}

<section class="sign">
<h2>5. Sign-off</h2>
<p>I confirm that this verification was run on the computer described in section 2 and that I have reviewed its results.</p>
<table><tbody>
${signRows.join('\n')}
</tbody></table>
</section>

<section class="annex">
<h2>Annex A. Check details</h2>
${report.checks.map(checkDetail).join('\n')}
</section>

<section>
<h2>Annex B. Reference files used</h2>
<p class="small">Files of the validation set read by this run, relative to <code>${escapeHtml(report.validationSet.directory)}</code>, with their SHA-256.</p>
<table class="files"><colgroup><col class="c1"><col></colgroup><thead><tr><th>File</th><th>SHA-256</th></tr></thead><tbody>
${files}
</tbody></table>
</section>
</body>
</html>
`;
}
