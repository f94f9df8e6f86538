/**
 * Fault injection: `plateau verify` run from a copy of the installed build (dist/) in which one
 * engine file has a small deliberate error must fail, name the failing check, and say FAIL in
 * the report. Patching a copy of the compiled files, rather than passing test-only overrides
 * into the runner, exercises exactly what a damaged or altered installation would run, keeps
 * any test hook out of the shipped code, and shows that the engine hash in the report changes.
 */
import { cpSync, copyFileSync, mkdtempSync, readFileSync, rmSync, symlinkSync, writeFileSync } from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { VerificationReport } from '../../../main/verify/types.js';
import { ensureBuilt, repoRoot, runVerifyCli } from './helpers.js';

const roots: string[] = [];
afterAll(() => roots.forEach((r) => rmSync(r, { recursive: true, force: true })));

/** A throw-away installation: dist/ copied, one file patched; resources, node_modules and package.json as installed. */
function patchedInstall(patch?: { file: string; from: string; to: string }): string {
  const root = mkdtempSync(path.join(os.tmpdir(), 'plateau-fault-'));
  roots.push(root);
  cpSync(path.join(repoRoot, 'dist'), path.join(root, 'dist'), { recursive: true });
  symlinkSync(path.join(repoRoot, 'resources'), path.join(root, 'resources'), 'dir');
  symlinkSync(path.join(repoRoot, 'node_modules'), path.join(root, 'node_modules'), 'dir');
  copyFileSync(path.join(repoRoot, 'package.json'), path.join(root, 'package.json'));
  if (!patch) return root;
  const { file, from, to } = patch;
  const target = path.join(root, 'dist', file);
  const text = readFileSync(target, 'utf8');
  const count = text.split(from).length - 1;
  // The injection must hit exactly one place; if the engine code moved, update `from` here.
  if (count !== 1) throw new Error(`fault injection: "${from}" occurs ${count} times in dist/${file}, expected once`);
  writeFileSync(target, text.replace(from, to));
  return root;
}

function verifyIn(root: string, out: string) {
  const run = runVerifyCli(path.join(root, 'dist/main/cli/plateau.js'), ['--quick', '--out', out], root);
  return { run, report: JSON.parse(readFileSync(path.join(root, 'report.json'), 'utf8')) as VerificationReport };
}

let originalHash: string;
beforeAll(() => {
  ensureBuilt();
  const { run, report } = verifyIn(patchedInstall(), 'report.json');
  expect(run.code, run.stdout + run.stderr).toBe(0);
  originalHash = report.engine.sha256;
}, 300_000);

describe('a 0.1 % error in the one-compartment elimination rate (engine/models/linear.js)', () => {
  let root: string;
  let run: ReturnType<typeof runVerifyCli>;
  let report: VerificationReport;
  beforeAll(() => {
    root = patchedInstall({ file: 'engine/models/linear.js', from: 'lam[0] = cl / v;', to: 'lam[0] = (cl / v) * 1.001;' });
    ({ run, report } = verifyIn(root, 'report.json'));
  }, 300_000);

  it('fails the run (exit 1) and names the model checks', () => {
    expect(run.code).toBe(1);
    expect(report.status).toBe('FAIL');
    const failed = report.checks.filter((c) => c.status === 'fail').map((c) => c.id);
    expect(failed).toContain('models.closed-form');
    expect(failed).toContain('models.ode-reference');
    expect(run.stdout).toMatch(/RESULT: FAIL \*\*\* \d+ of \d+ checks FAILED: .*models\.closed-form/);
    expect(run.stdout).toMatch(/FAIL\s+models\.closed-form/);
    const c = report.checks.find((x) => x.id === 'models.closed-form')!;
    expect(c.found).toMatch(/outside tolerance/);
    expect(c.rows.some((r) => !r.pass)).toBe(true);
  });

  it('the report carries a different engine hash', () => {
    expect(report.engine.sha256).not.toBe(originalHash);
  });

  it('the HTML report says FAIL in its verdict and conclusion and names the check', () => {
    const html = runVerifyCli(path.join(root, 'dist/main/cli/plateau.js'), ['--quick', '--out', 'report.html'], root);
    expect(html.code).toBe(1);
    const text = readFileSync(path.join(root, 'report.html'), 'utf8');
    expect(text).toContain('<div class="verdict FAIL"><span class="word">FAIL</span>');
    expect(text).toContain('The installation FAILED verification');
    expect(text).toMatch(/checks FAILED: [^<]*models\.closed-form/);
    expect(text).toContain('<title>Plateau installation verification report: FAIL</title>');
  }, 300_000);
});

describe('-2LL shifted by 1 in importance sampling (engine/posthoc/likelihood.js)', () => {
  it('fails exactly the -2LL check', () => {
    const root = patchedInstall({ file: 'engine/posthoc/likelihood.js', from: 'out.minus2LL = -2 * total;', to: 'out.minus2LL = -2 * total + 1;' });
    const { run, report } = verifyIn(root, 'report.json');
    expect(run.code).toBe(1);
    expect(report.checks.filter((c) => c.status === 'fail').map((c) => c.id)).toEqual(['likelihood.theoph.exact-mle']);
    expect(run.stdout).toContain('checks FAILED: likelihood.theoph.exact-mle');
  }, 300_000);
});
