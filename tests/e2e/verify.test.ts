/**
 * Help > Verify this installation in Debian's Chromium against the real web host: open the view
 * from the header, run the quick suite (in the host's engine worker), watch every check of the
 * suite reach its state, see PASS, print the report to PDF (page.pdf, the browser's print path)
 * with the version, the engine hash and the signature lines in its text, and find the run among
 * the runs saved in the project. axe-core on the view; fails on console errors and failed
 * requests. The checks' own references are resources/validation (suite.json names each source).
 */
import { execFileSync } from 'node:child_process';
import { cpSync, existsSync, mkdtempSync, readFileSync, readdirSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { ARTIFACTS, CHROMIUM, openBrowser, type Session } from './helpers/browser.js';
import { seriousViolations } from './helpers/axe.js';
import { ROOT, startHost, type RunningHost } from './helpers/host.js';
import { AppService } from '../../main/services/appService.js';

const haveChromium = existsSync(CHROMIUM);
const built = existsSync(path.join(ROOT, 'dist', 'renderer', 'index.html')) && existsSync(path.join(ROOT, 'dist', 'main', 'start.js'));
const suite = JSON.parse(readFileSync(path.join(ROOT, 'resources', 'validation', 'suite.json'), 'utf8')) as { checks: { id: string; quick: boolean }[] };
const quickIds = suite.checks.filter((c) => c.quick).map((c) => c.id);

describe.skipIf(!haveChromium || !built)('Verify this installation in Chromium (web host, real services)', () => {
  let host: RunningHost;
  let s: Session;

  beforeAll(async () => {
    host = await startHost();
    s = await openBrowser({ width: 1366, height: 768 });
  }, 60_000);

  afterAll(async () => {
    await s?.close();
    await host?.stop();
  });

  it('runs the quick suite with progress, shows PASS and every check, prints the report', async () => {
    const page = s.page;
    await page.goto(host.url);
    // The caution is acknowledged first (first run), as every user does.
    await page.getByRole('checkbox', { name: /I have read this/ }).check();
    await page.getByRole('button', { name: 'Continue to Plateau' }).click();
    await expect.poll(() => page.getByRole('dialog').count()).toBe(0);

    await page.getByRole('button', { name: 'Verify this installation' }).click();
    const heading = page.getByRole('heading', { level: 1, name: 'Verify this installation' });
    await heading.waitFor();
    expect(await page.evaluate('document.activeElement?.tagName')).toBe('H1');
    expect(await page.getByText('No verification has been run in this project yet.').isVisible()).toBe(true);
    await s.shot('verify-01-view');
    expect(await seriousViolations(page)).toEqual([]);

    // Keyboard: the quick suite starts from the keyboard.
    await page.getByRole('button', { name: 'Run the quick suite' }).focus();
    await page.keyboard.press('Enter');
    await page.getByRole('button', { name: 'Cancel the run' }).waitFor({ timeout: 10_000 }).catch(() => undefined);
    const verdict = page.getByRole('status', { name: /Verification result: (PASS|FAIL)/ });
    await verdict.waitFor({ timeout: 120_000 });
    expect(await verdict.getAttribute('aria-label')).toBe('Verification result: PASS');

    // The progress list holds every check of the quick suite, each with its final state.
    const items = page.locator('ol.checklist li');
    expect(await items.count()).toBe(quickIds.length);
    const listed = await items.locator('.cid').allTextContents();
    expect(listed).toEqual(quickIds);
    for (const state of await items.locator('.state').allTextContents()) expect(state).toMatch(/^(PASS|not run \(planned\))$/);
    expect(await page.getByRole('heading', { level: 2, name: new RegExp(`${quickIds.length} of ${quickIds.length} checks done`) }).isVisible()).toBe(true);

    // The report lists every check with its result.
    const reportRows = page.locator('article.vreport table.checks tbody tr');
    expect(await reportRows.count()).toBe(quickIds.length);
    await s.shot('verify-02-done');
    await page.locator('article.vreport').scrollIntoViewIfNeeded();
    await s.shot('verify-03-report');
    expect(await seriousViolations(page)).toEqual([]);

    // Saved in the project folder and listed among the saved runs.
    const runs = readdirSync(path.join(host.projectDir, 'validation'));
    expect(runs).toHaveLength(1);
    expect(existsSync(path.join(host.projectDir, 'validation', runs[0], 'report.html'))).toBe(true);
    const saved = JSON.parse(readFileSync(path.join(host.projectDir, 'validation', runs[0], 'report.json'), 'utf8')) as { status: string; engine: { sha256: string }; application: { version: string; engineVersion: string } };
    expect(saved.status).toBe('PASS');
    const pastRow = page.getByRole('region', { name: 'Runs saved in this project' }).locator('tbody tr');
    await expect.poll(() => pastRow.count()).toBe(1);
    expect(await pastRow.textContent()).toMatch(/quick\s*PASS/);

    // Print: the browser's print path (print stylesheet) to PDF.
    const pdf = path.join(ARTIFACTS, 'verification-report.pdf');
    await page.pdf({ path: pdf, format: 'A4', printBackground: true, margin: { top: '12mm', bottom: '12mm', left: '12mm', right: '12mm' } });
    const text = execFileSync('pdftotext', ['-layout', pdf, '-'], { encoding: 'utf8' });
    expect(text).toMatch(/PASS/);
    expect(text).toContain(saved.engine.sha256);
    expect(text).toContain(`engine ${saved.application.engineVersion}`);
    expect(text).toContain(saved.application.version);
    expect(text).toContain('Validating pharmacist (name)');
    expect(text).toContain('Signature');
    expect(text).toContain('Reviewed by (name, role)');
    for (const id of quickIds) expect(text).toContain(id);
    // The screen-only parts are not printed.
    expect(text).not.toContain('Run the quick suite');
    expect(text).not.toContain('Runs saved in this project');

    // Cancel: the full suite stops at once, says so, and saves nothing.
    await page.getByRole('button', { name: 'Run the full suite' }).click();
    await page.locator('ol.checklist li.running').first().waitFor({ timeout: 30_000 });
    await page.getByRole('button', { name: 'Cancel the run' }).click();
    await page.getByText('The verification was cancelled.').waitFor({ timeout: 30_000 });
    expect(await page.getByRole('button', { name: 'Run the full suite' }).isEnabled()).toBe(true);
    expect(readdirSync(path.join(host.projectDir, 'validation'))).toHaveLength(1);

    expect(s.failures).toEqual([]);
  }, 240_000);

  it('shows a failed run from the project with FAIL and the failing check', async () => {
    // A real run against a validation set whose closed-form reference is 1 % off (in a copy of
    // resources/, in a project of its own), then its saved folder copied into the host's project.
    const resCopy = mkdtempSync(path.join(tmpdir(), 'plateau-e2e-res-'));
    cpSync(path.join(ROOT, 'resources'), resCopy, { recursive: true });
    const refFile = path.join(resCopy, 'validation', 'reference', 'closed-form', 'closed_form.json');
    const ref = JSON.parse(readFileSync(refFile, 'utf8')) as { cases: { concMgL: number[] }[] };
    ref.cases[0].concMgL[3] *= 1.01;
    writeFileSync(refFile, JSON.stringify(ref));
    const other = await AppService.start({ workerEntry: path.join(ROOT, 'dist', 'main', 'worker', 'engineWorker.js'), resourcesDir: resCopy, engineDir: path.join(ROOT, 'dist', 'engine'), projectDir: mkdtempSync(path.join(tmpdir(), 'plateau-e2e-fail-')), host: 'web', concurrency: 1, log: () => undefined });
    let savedIn = '';
    try {
      const r = await other.handle('verify.run', { quick: true });
      if (!r.ok) throw new Error(r.error.message);
      savedIn = (r.value as { savedIn: string }).savedIn;
    } finally {
      await other.close();
    }
    cpSync(savedIn, path.join(host.projectDir, 'validation', path.basename(savedIn)), { recursive: true });

    const page = s.page;
    await page.reload();
    await page.getByRole('button', { name: 'Verify this installation' }).click();
    await page.getByRole('heading', { level: 1, name: 'Verify this installation' }).waitFor();
    const show = page.getByRole('button', { name: /Show the report of .*\(FAIL\)/ });
    await show.waitFor();
    await show.click();
    const verdict = page.getByRole('status', { name: 'Verification result: FAIL' });
    await verdict.waitFor();
    expect(await verdict.textContent()).toMatch(/1 of \d+ checks FAILED: models\.closed-form/);
    expect(await page.locator('article.vreport table.checks tr.failed').count()).toBe(1);
    await verdict.scrollIntoViewIfNeeded();
    await s.shot('verify-04-fail');
    expect(await seriousViolations(page)).toEqual([]);
    expect(s.failures).toEqual([]);
  }, 240_000);
});
