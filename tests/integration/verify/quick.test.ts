/**
 * `plateau verify --quick` on the compiled build: it passes, and its JSON report lists every
 * quick check of resources/validation/suite.json with its source, tolerance and the value found,
 * plus the machine, the versions and the engine hash. The PDF (headless Chromium) holds the
 * version, the hash and the signature lines.
 */
import { execFileSync } from 'node:child_process';
import { createHash } from 'node:crypto';
import { mkdtempSync, readFileSync, readdirSync, rmSync } from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { findChromium } from '../../../main/verify/pdf.js';
import type { VerificationReport } from '../../../main/verify/types.js';
import { distCli, ensureBuilt, repoRoot, runVerifyCli } from './helpers.js';

const suite = JSON.parse(readFileSync(path.join(repoRoot, 'resources/validation/suite.json'), 'utf8')) as { checks: { id: string; source: string; quick: boolean; status?: string }[] };
let dir: string;

beforeAll(() => {
  ensureBuilt();
  dir = mkdtempSync(path.join(os.tmpdir(), 'plateau-verify-'));
}, 300_000);
afterAll(() => rmSync(dir, { recursive: true, force: true }));

/** What `find . -name '*.js' | LC_ALL=C sort | xargs sha256sum | sha256sum` gives in dist/engine. */
function engineHashByHand(engineDir: string): string {
  const files: string[] = [];
  const walk = (d: string, rel: string) => {
    for (const e of readdirSync(d, { withFileTypes: true })) {
      if (e.isDirectory()) walk(path.join(d, e.name), `${rel}/${e.name}`);
      else if (e.name.endsWith('.js')) files.push(`${rel}/${e.name}`);
    }
  };
  walk(engineDir, '.');
  files.sort((a, b) => Buffer.compare(Buffer.from(a), Buffer.from(b)));
  const sha = (b: Buffer | string) => createHash('sha256').update(b).digest('hex');
  return sha(files.map((f) => `${sha(readFileSync(path.join(engineDir, f)))}  ${f}\n`).join(''));
}

describe('plateau verify --quick', () => {
  let run: ReturnType<typeof runVerifyCli>;
  let report: VerificationReport;
  beforeAll(() => {
    run = runVerifyCli(distCli, ['--quick', '--out', 'report.json'], dir);
    report = JSON.parse(readFileSync(path.join(dir, 'report.json'), 'utf8'));
  }, 300_000);

  it('passes with exit status 0', () => {
    expect(run.stdout).toContain('RESULT: PASS');
    expect(run.code, run.stdout + run.stderr).toBe(0);
    expect(report.status).toBe('PASS');
    expect(report.mode).toBe('quick');
  });

  it('lists every quick check of suite.json, each with source, tolerance, value found and result', () => {
    const quick = suite.checks.filter((c) => c.quick);
    expect(report.checks.map((c) => c.id)).toEqual(quick.map((c) => c.id));
    for (const c of report.checks) {
      expect(c.status, `${c.id}: ${c.found}`).toBe('pass');
      expect(c.source).toBe(suite.checks.find((s) => s.id === c.id)!.source);
      expect(c.tolerance.length).toBeGreaterThan(5);
      expect(c.found.length).toBeGreaterThan(5);
      expect(c.rows.length).toBeGreaterThan(0);
      for (const r of c.rows) expect(r.found).not.toBeUndefined();
      expect(c.reference.sha256).toMatch(/^[0-9a-f]{64}$/);
    }
    // Every part of the job is covered.
    expect(new Set(report.checks.map((c) => c.part))).toEqual(new Set(['Structural models', 'Population estimator', 'Standard errors and -2LL', 'Dose advice', 'Spreadsheet import', 'Reproducibility']));
    expect(report.summary).toEqual({ total: report.checks.length, passed: report.checks.length, failed: 0, notRun: 0 });
  });

  it('records the machine, the versions, the time and a hash of the installed engine files that standard tools reproduce', () => {
    const pkg = JSON.parse(readFileSync(path.join(repoRoot, 'package.json'), 'utf8'));
    expect(report.application.version).toBe(pkg.version);
    expect(report.application.engineVersion).toMatch(/^\d+\.\d+\.\d+/);
    expect(report.machine.cores).toBe(os.cpus().length);
    expect(report.machine.cpuModel.length).toBeGreaterThan(0);
    expect(report.machine.memoryGiB).toBeGreaterThan(0);
    expect(report.engine.pattern).toContain('installed build');
    expect(report.engine.sha256).toBe(engineHashByHand(path.join(repoRoot, 'dist/engine')));
    expect(Date.parse(report.finishedAt)).toBeGreaterThanOrEqual(Date.parse(report.startedAt));
    expect(report.durationMs).toBeGreaterThan(0);
    expect(report.signOff).toContain('Validating pharmacist (name)');
    expect(report.validationSet.files.map((f) => f.path)).toContain('suite.json');
  });
});

describe('plateau verify (full suite)', () => {
  it('passes, runs every check of suite.json and lists the planned ones as not run', () => {
    const run = runVerifyCli(distCli, ['--out', 'full.json'], dir);
    const report = JSON.parse(readFileSync(path.join(dir, 'full.json'), 'utf8')) as VerificationReport;
    expect(run.code, run.stdout + run.stderr).toBe(0);
    expect(report.mode).toBe('full');
    expect(report.checks.map((c) => c.id)).toEqual(suite.checks.map((c) => c.id));
    for (const c of report.checks) expect(c.status, `${c.id}: ${c.found}`).toBe(suite.checks.find((s) => s.id === c.id)!.status === 'planned' ? 'not-run' : 'pass');
    expect(report.checks.filter((c) => c.id.startsWith('estimator.theoph.seed-')).length).toBeGreaterThanOrEqual(3);
  }, 300_000);
});

describe('the report as PDF', () => {
  const chromium = findChromium();
  it.skipIf(!chromium)('plateau verify --quick --out report.pdf prints the version, the engine hash and the signature lines (Chromium, text by pdftotext)', () => {
    const run = runVerifyCli(distCli, ['--quick', '--out', 'report.pdf'], dir);
    expect(run.code, run.stderr).toBe(0);
    const pdf = readFileSync(path.join(dir, 'report.pdf'));
    expect(pdf.subarray(0, 5).toString()).toBe('%PDF-');
    let text: string;
    try {
      text = execFileSync('pdftotext', ['-layout', path.join(dir, 'report.pdf'), '-'], { encoding: 'utf8' });
    } catch {
      return; // poppler-utils absent: the PDF header check above is what remains
    }
    const flat = text.replace(/\s+/g, ' ');
    const hash = /engine files SHA-256 ([0-9a-f]{64})/.exec(run.stdout)![1];
    const pkg = JSON.parse(readFileSync(path.join(repoRoot, 'package.json'), 'utf8'));
    expect(flat).toContain('Plateau installation verification report');
    expect(flat).toContain(`Plateau ${pkg.version}`);
    expect(flat).toContain(hash);
    expect(flat).toContain('Validating pharmacist (name)');
    expect(flat).toContain('Signature');
    expect(flat).toContain('Reviewed by (name, role)');
    expect(flat).toContain('PASS');
    expect(flat).toMatch(/Page 1 of \d+/);
  }, 300_000);

  it('without a Chromium, --out report.pdf says what is needed and suggests .html, before running anything', () => {
    const run = runVerifyCli(distCli, ['--quick', '--out', 'x.pdf'], dir, { ...process.env, PLATEAU_CHROMIUM: path.join(dir, 'no-such-browser') });
    expect(run.code).toBe(1);
    expect(run.stderr).toContain('PLATEAU_CHROMIUM');
    expect(run.stderr).toContain('--out report.html');
    expect(run.stderr).not.toContain('[ 1/');
  });

  it('an unknown report format is a usage error', () => {
    const run = runVerifyCli(distCli, ['--out', 'report.docx'], dir);
    expect(run.code).toBe(2);
    expect(run.stderr).toContain('.pdf, .html or .json');
  });
});
