/**
 * The whole job as a new user does it, in Debian's Chromium against the real web host and its
 * real services (no stand-in): acknowledge the caution, import the demo spreadsheet, set up and
 * save a model, queue two fits with two seeds, watch them run, open and compare the results, get
 * dose advice for the demo patient (blocked: the demo model is an example), override, and print
 * the dosing report to PDF. Every view is checked with axe-core. The test fails on any console
 * error or failed request. Screenshots go to test-artifacts/ (gitignored).
 */
import { execFileSync } from 'node:child_process';
import { existsSync, readFileSync, writeFileSync } from 'node:fs';
import * as path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { ARTIFACTS, CHROMIUM, openBrowser, type Session } from './helpers/browser.js';
import { seriousViolations } from './helpers/axe.js';
import { childPids, ROOT, startHost, type RunningHost } from './helpers/host.js';

const haveChromium = existsSync(CHROMIUM);
const built = existsSync(path.join(ROOT, 'dist', 'renderer', 'index.html')) && existsSync(path.join(ROOT, 'dist', 'main', 'start.js'));

describe.skipIf(!haveChromium || !built)('the app in Chromium (web host, real services)', () => {
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

  const view = (name: string) => s.page.getByRole('navigation', { name: 'Views' }).getByRole('button', { name: new RegExp(`^${name}`) });
  const heading = (name: string) => s.page.getByRole('heading', { level: 1, name });

  /**
   * Start an engine request in the view, press its Cancel while the worker computes, and check
   * that the worker process itself ends (not only that the view stops waiting).
   */
  async function cancelEndsWorker(start: () => Promise<void>, busyText: RegExp) {
    const before = new Set(childPids(host.pid));
    await start();
    await expect.poll(() => childPids(host.pid).filter((p) => !before.has(p)).length, { timeout: 20_000, interval: 20 }).toBe(1);
    const worker = childPids(host.pid).find((p) => !before.has(p)) as number;
    await s.page.getByText(busyText).waitFor();
    await s.page.getByRole('button', { name: 'Cancel', exact: true }).click();
    const cancelledAt = Date.now();
    await expect.poll(() => childPids(host.pid).includes(worker), { timeout: 5_000, interval: 20 }).toBe(false);
    expect(Date.now() - cancelledAt).toBeLessThan(3_000);
    expect(await s.page.getByText(busyText).count()).toBe(0);
    expect(await s.page.getByRole('button', { name: 'Cancel', exact: true }).count()).toBe(0);
  }

  async function accessible(label: string) {
    const v = await seriousViolations(s.page);
    expect(v, `${label}: ${JSON.stringify(v, null, 1)}`).toEqual([]);
  }

  it('does the whole job on the demo project', async () => {
    const page = s.page;
    await page.goto(host.url);

    // First run: the caution must be acknowledged before anything else.
    const dialog = page.getByRole('dialog');
    await expect.poll(() => dialog.isVisible()).toBe(true);
    expect(await dialog.textContent()).toContain('decision support for qualified clinicians');
    const cont = page.getByRole('button', { name: 'Continue to Plateau' });
    expect(await cont.isDisabled()).toBe(true);
    await s.shot('01-first-run');
    await accessible('first run');
    await page.getByRole('checkbox', { name: /I have read this/ }).check();
    await cont.click();
    await expect.poll(() => dialog.count()).toBe(0);

    // Keyboard: Alt+number switches view and puts focus on its heading; the navigation is reached by Tab with a visible outline.
    await page.keyboard.press('Alt+5');
    await heading('Dosing').waitFor();
    expect(await page.evaluate('document.activeElement?.tagName')).toBe('H1');
    await page.keyboard.press('Alt+1');
    await heading('Import').waitFor();
    // From the view's heading, Shift+Tab goes back into the navigation (its last entry).
    await page.keyboard.press('Shift+Tab');
    const focused = page.locator(':focus');
    expect(await focused.textContent()).toMatch(/^Dosing/);
    expect(await focused.evaluate((el) => getComputedStyle(el).outlineStyle)).toBe('solid');

    // Import the demo spreadsheet, accept the suggested roles, see the report, add it.
    await view('Import').click();
    await heading('Import').waitFor();
    // A large export (the demo's rows under 800 sets of new ids, about 13 MB): Cancel ends the worker reading it.
    const lines = readFileSync(path.join(ROOT, 'resources', 'demo', 'ward-levels.csv'), 'utf8').trim().split('\n');
    const big = [lines[0]];
    for (let k = 0; k < 800; k++) for (const l of lines.slice(1)) big.push(l.replace(/^HX-/, `P${k}-`));
    const bigFile = path.join(ARTIFACTS, 'big-ward-export.csv');
    writeFileSync(bigFile, big.join('\n') + '\n');
    await cancelEndsWorker(() => page.getByLabel(/Open a spreadsheet/).setInputFiles(bigFile), /^Reading big-ward-export\.csv in a separate process/);
    expect(await page.getByRole('heading', { name: /Summary of big-ward-export/ }).count()).toBe(0);

    await page.getByLabel(/Open a spreadsheet/).setInputFiles(path.join(ROOT, 'resources', 'demo', 'ward-levels.csv'));
    await page.getByRole('heading', { name: /Summary of ward-levels\.csv/ }).waitFor({ timeout: 30_000 });
    const summary = await page.locator('.summary').textContent();
    expect(summary).toMatch(/\d+ patients · \d+ doses · \d+ levels/);
    expect(await page.getByLabel(/Role of column A \(subject\)/).inputValue()).toBe('patientId');
    expect(await page.getByRole('heading', { name: /^4\. Problems \(\d+\)/ }).isVisible()).toBe(true);
    await s.shot('02-import');
    await accessible('Import');
    await page.getByLabel('Dataset name').fill('Ward levels (imported)');
    await page.getByRole('button', { name: 'Add the dataset to the project' }).click();
    await page.getByText(/Added\. Next: choose a model/).waitFor();

    // A messier export (invented ward data, semicolons, German headers): its problems, each leading to its row.
    await page.getByLabel(/Open a spreadsheet/).setInputFiles(path.join(ROOT, 'tests', 'fixtures', 'import', 'ward7b_german.csv'));
    await page.getByRole('heading', { name: /Summary of ward7b_german\.csv/ }).waitFor({ timeout: 30_000 });
    const problemLinks = page.getByRole('button', { name: /, row \d+/ });
    expect(await problemLinks.count()).toBeGreaterThan(0);
    const first = (await problemLinks.first().textContent()) as string;
    await problemLinks.first().click();
    const row = /, row (\d+)/.exec(first)![1];
    await page.getByRole('heading', { name: new RegExp(`, row ${row}$`) }).waitFor();
    expect(await page.locator('pre.rowtext mark').textContent()).toMatch(/;/);
    await page.getByRole('heading', { name: /^4\. Problems/ }).scrollIntoViewIfNeeded();
    await s.shot('02b-import-problems');
    await page.getByRole('heading', { name: /Per-patient timeline/ }).scrollIntoViewIfNeeded();
    await s.shot('02c-import-timeline');
    await accessible('Import (problems)');

    // Models: one compartment, short estimation so the test stays quick, the curves over the data, save.
    await view('Models').click();
    await heading('Models').waitFor();
    await page.getByRole('radio', { name: /One compartment, linear/ }).check();
    await page.getByLabel('Model name').fill('1-cmt quick');
    await page.getByLabel('CL initial value (L/h)').fill('5');
    await page.getByLabel('V initial value (L)').fill('40');
    await page.getByLabel(/Search phase: at least/).fill('30');
    await page.getByLabel(/Search phase: at most/).fill('60');
    await page.getByLabel(/Averaging \(iterations\)/).fill('40');
    await page.getByLabel(/Settle window/).fill('10');
    await page.getByRole('img', { name: /Patient .*: levels and the curve at the initial values/ }).first().waitFor();
    await page.getByRole('heading', { name: /Predictions at the initial values/ }).scrollIntoViewIfNeeded();
    await s.shot('03-models');
    await accessible('Models');

    // Correlated BSV, by keyboard: a block of CL and V, a value out of bounds, V without BSV: each named; then removed.
    await page.getByRole('button', { name: 'Add a correlation block' }).focus();
    await page.keyboard.press('Enter');
    const block1 = page.getByRole('group', { name: 'Parameters in correlation block 1' });
    expect(await block1.getByRole('checkbox', { name: 'CL', exact: true }).isChecked()).toBe(true);
    expect(await block1.getByRole('checkbox', { name: 'V', exact: true }).isChecked()).toBe(true);
    const corr = page.getByLabel('Initial correlation CL with V (no unit, −0.95 to 0.95)');
    await corr.fill('0.99');
    await page.getByText('Correlation block 1, CL with V: "0.99" is not a correlation from −0.95 to 0.95.').first().waitFor();
    await corr.fill('0.2');
    await page.getByLabel('Between-subject variability on V').focus();
    await page.keyboard.press('Space');
    await page.getByText(/^Correlation block 1: V has no between-subject variability \(BSV\), so it cannot be correlated/).first().waitFor();
    expect(await block1.getByRole('checkbox', { name: 'V (no BSV)' }).count()).toBe(1);
    await page.getByRole('heading', { name: 'Correlated between-subject variability' }).evaluate((e) => e.scrollIntoView({ block: 'start' }));
    await s.shot('03b-models-correlations');
    await accessible('Models (correlations)');
    await page.getByLabel('Between-subject variability on V').focus();
    await page.keyboard.press('Space');
    await expect.poll(() => page.getByText(/^Correlation block 1:/).count()).toBe(0);
    await page.getByRole('button', { name: 'Remove correlation block 1' }).focus();
    await page.keyboard.press('Enter');
    expect(await page.getByRole('group', { name: 'Parameters in correlation block 1' }).count()).toBe(0);
    expect(await page.locator(':focus').textContent()).toBe('Add a correlation block');
    await page.getByRole('button', { name: 'Save the model to the project' }).click();
    await page.getByText(/Saved\. Next: queue fits/).waitFor();

    // Fit queue: two fits of the saved model on the imported data, the first from seeds 1 and 2
    // (their agreement is checked), the second from seed 3; watch them.
    await view('Fit queue').click();
    await heading('Fit queue').waitFor();
    const datasetValue = await page.getByLabel('Dataset').locator('option', { hasText: 'Ward levels (imported)' }).getAttribute('value');
    await page.getByLabel('Dataset').selectOption(datasetValue as string);
    const modelValue = await page.getByLabel('Model').locator('option', { hasText: '1-cmt quick' }).getAttribute('value');
    await page.getByLabel('Model').selectOption(modelValue as string);
    await page.getByLabel(/Seeds of this fit/).fill('1, 2');
    await page.getByRole('button', { name: 'Add to the queue' }).click();
    await page.getByLabel(/Seeds of this fit/).fill('3');
    await page.getByRole('button', { name: 'Add to the queue' }).click();
    // A small fit can finish within a poll: accept it seen running or already finished.
    await page.getByText(/^(Running|Finished)$/).first().waitFor({ timeout: 30_000 });
    await page.getByRole('progressbar').first().waitFor();
    // The live convergence charts: one per estimate, drawn from the worker's progress reports.
    await page.getByRole('heading', { name: /^Convergence/ }).waitFor({ timeout: 30_000 });
    await page.getByRole('img', { name: 'CL against iteration', exact: true }).waitFor();
    await s.shot('04-queue-running');
    await accessible('Fit queue');
    await expect.poll(() => page.getByRole('button', { name: /Open the results of/ }).count(), { timeout: 150_000, interval: 1000 }).toBe(2);
    await s.shot('05-queue-done');
    expect(await page.getByText(/^Agreement across seeds: the 2 seeds (agree|disagree)/).count()).toBe(1);

    // Re-run the first fit twice with other seeds, move the last one up, then cancel them.
    for (const seeds of ['4, 5', '6, 7']) {
      const rerunInput = page.getByLabel(/^Seeds to re-run .*seeds 1, 2 with$/);
      await rerunInput.fill(seeds);
      await rerunInput.locator('xpath=following-sibling::button').click();
    }
    await expect.poll(() => page.getByRole('button', { name: /^Move .* down$/ }).count(), { timeout: 30_000 }).toBeGreaterThanOrEqual(1);
    const queuedBefore = await page.getByRole('button', { name: /^Move .* up$/ }).evaluateAll((b) => b.map((x) => x.getAttribute('aria-label')));
    await page.getByRole('button', { name: queuedBefore[queuedBefore.length - 1] as string }).click();
    await expect
      .poll(async () => (await page.getByRole('button', { name: /^Move .* up$/ }).evaluateAll((b) => b.map((x) => x.getAttribute('aria-label')))).join('|'), { timeout: 10_000 })
      .not.toBe(queuedBefore.join('|'));
    while ((await page.getByRole('button', { name: /^Cancel / }).count()) > 0) {
      await page.getByRole('button', { name: /^Cancel / }).first().click();
      await page.waitForTimeout(200);
    }
    await expect.poll(() => page.getByText('Cancelled', { exact: true }).count(), { timeout: 30_000 }).toBeGreaterThanOrEqual(1);

    // Results: open the first, tick the second for the comparison.
    await page.getByRole('button', { name: /Open the results of .*seeds 1, 2$/ }).click();
    await heading('Results').waitFor();
    await page.getByRole('table').filter({ hasText: 'Population estimates' }).waitFor({ timeout: 30_000 });
    const estimates = await page.getByRole('table').filter({ hasText: 'Population estimates' }).textContent();
    expect(estimates).toContain('CL (typical value) (L/h)');
    expect(estimates).toContain('BSV of CL');
    expect(await page.getByRole('row', { name: /−2 log-likelihood/ }).textContent()).toMatch(/± .*Monte Carlo error/);
    expect(await page.getByRole('region', { name: 'Agreement of fits from other seeds' }).textContent()).toMatch(/Fits from 2 seeds/);
    const unticked = page.getByRole('group', { name: /Show and compare/ }).getByRole('checkbox', { checked: false });
    await unticked.first().check();
    await page.getByRole('heading', { name: 'Model comparison' }).waitFor();
    await s.shot('06-results');
    await accessible('Results');
    for (const [i, plot] of ['Observed vs predicted', 'Residuals and NPDE', 'Individual fits', 'VPC', 'Random effects vs covariates', 'Convergence'].entries()) {
      await page.getByRole('button', { name: plot, exact: true }).click();
      expect(await page.getByRole('button', { name: plot, exact: true }).getAttribute('aria-pressed')).toBe('true');
      await page.getByRole('heading', { name: 'Diagnostic plots' }).scrollIntoViewIfNeeded();
      await page.waitForTimeout(150);
      await s.shot(`07-results-plot-${i + 1}`);
    }
    expect(await page.getByRole('img', { name: /^Convergence of CL$/ }).count()).toBe(1);
    // Individual fits of a large site: go to a subject by its ID; the worst-fitted first.
    await page.getByRole('button', { name: 'Individual fits', exact: true }).click();
    const demoIds = [...new Set(readFileSync(path.join(ROOT, 'resources', 'demo', 'ward-levels.csv'), 'utf8').trim().split('\n').slice(1).map((l) => l.split(',')[0]))];
    const lastId = demoIds[demoIds.length - 1];
    await page.getByRole('textbox', { name: 'Go to subject' }).fill(lastId);
    await page.getByRole('button', { name: 'Go', exact: true }).click();
    await page.getByText(new RegExp(`^Subject ${lastId}: page ${Math.ceil(demoIds.length / 12)}\\.`)).waitFor();
    expect(await page.getByRole('img', { name: `Subject ${lastId}: levels and fitted curves` }).count()).toBe(1);
    await page.getByRole('textbox', { name: 'Go to subject' }).fill('no-such-id');
    await page.getByRole('button', { name: 'Go', exact: true }).click();
    await page.getByText(/^No subject "no-such-id" in this fit's dataset/).waitFor();
    await page.getByRole('combobox', { name: 'Order' }).selectOption('iwres');
    await page.getByText(/^Page 1 of /).waitFor();
    await s.shot('07b-results-individual-order');
    await accessible('Results, individual fits controls');
    await page.getByRole('combobox', { name: 'Order' }).selectOption('dataset');
    // The tables as .xlsx: a real spreadsheet (zip container) arrives as a download.
    const [download] = await Promise.all([page.waitForEvent('download'), page.getByRole('button', { name: 'Export tables (.xlsx)' }).click()]);
    expect(download.suggestedFilename()).toMatch(/\.xlsx$/);
    const xlsx = readFileSync((await download.path()) as string);
    expect(xlsx.subarray(0, 2).toString('latin1')).toBe('PK');
    await page.getByText(/^Saved .*\.xlsx to your downloads\./).waitFor();

    // The fit report as printed (print stylesheet: every plot, no navigation, no buttons).
    await page.evaluate('window.print = () => undefined');
    await page.getByRole('button', { name: 'Print the fit report' }).click();
    const fitPdf = path.join(ARTIFACTS, 'fit-report.pdf');
    await page.pdf({ path: fitPdf, format: 'A4', printBackground: true, margin: { top: '12mm', bottom: '12mm', left: '12mm', right: '12mm' } });
    const fitText = execFileSync('pdftotext', ['-layout', fitPdf, '-'], { encoding: 'utf8' });
    expect(fitText).toContain('Population estimates');
    expect(fitText).toMatch(/−2 log-likelihood\s+[\d.]+ ± [\d.]+/);
    expect(fitText).toContain('Model comparison');
    expect(fitText).not.toContain('Advice for one patient');
    expect(fitText).not.toContain('Export tables (.xlsx)');
    for (const part of ['Observed against predictions', 'Residuals and NPDE', 'Prediction-corrected VPC', 'Convergence']) expect(fitText).toContain(part);
    // Every subject's individual fit is printed (the screen shows them a page at a time), the last one included.
    const ids = [...new Set(readFileSync(path.join(ROOT, 'resources', 'demo', 'ward-levels.csv'), 'utf8').trim().split('\n').slice(1).map((l) => l.split(',')[0]))];
    expect(ids.length).toBeGreaterThan(12);
    expect(fitText).toContain(`Individual fits: subjects 1 to 6 of ${ids.length} (${ids[0]} to ${ids[5]})`);
    expect(fitText).toMatch(new RegExp(`Individual fits: subjects \\d+ to ${ids.length} of ${ids.length} \\(${ids[Math.floor((ids.length - 1) / 6) * 6]} to ${ids[ids.length - 1]}\\)`));

    // Dosing, first with the literature example model: blocked (labelled "not for clinical use"), then overridden.
    await view('Dosing').click();
    await heading('Dosing').waitFor();
    expect(await page.getByRole('region', { name: 'Caution' }).textContent()).toContain('decision support for qualified clinicians');
    const prior = page.getByLabel('Model the advice is based on');
    await prior.selectOption((await prior.locator('option', { hasText: 'Example vancomycin-like' }).getAttribute('value')) as string);
    await page.getByLabel(/Or load a patient file/).setInputFiles(path.join(ROOT, 'resources', 'demo', 'patient.json'));
    await expect.poll(() => page.getByLabel('Patient identifier (no names)').inputValue()).toBe('demo bed 4 (invented patient)');
    expect(await page.getByLabel('Level 1 concentration (mg/L)').inputValue()).toBe('18.4');
    await page.getByLabel('Target preset').selectOption('vancomycin-auc24');
    // Cancel while the advice is computed: its worker process ends and no advice is shown.
    await cancelEndsWorker(() => page.getByRole('button', { name: 'Compute dose advice' }).click(), /^Computing the posterior and ranking regimens/);
    expect(await page.locator('div.verdict').count()).toBe(0);
    await page.getByRole('button', { name: 'Compute dose advice' }).click();
    const verdict = page.locator('div.verdict');
    await verdict.waitFor({ timeout: 60_000 });
    expect(await verdict.textContent()).toMatch(/Blocked: no dose advice.*not for clinical use/s);
    expect(await page.getByRole('table').filter({ hasText: 'Regimens ranked' }).count()).toBe(0);
    await s.shot('08-dosing-blocked');
    await accessible('Dosing (blocked)');
    await page.getByRole('button', { name: /Show the regimens anyway/ }).click();
    await page.getByText(/Blocked – regimens shown on request only/).waitFor({ timeout: 60_000 });
    const blockedTable = page.getByRole('table').filter({ hasText: 'Regimens ranked' });
    expect(await blockedTable.textContent()).toMatch(/BLOCKED: shown on request only/);
    expect(await blockedTable.getByRole('row').nth(1).textContent()).toMatch(/mg every \d+ h/);
    await s.shot('09-dosing-override');

    // A model from a publication, entered in the form (invented values here): checked as typed.
    await prior.selectOption('entered');
    await page.getByText('Source: give the publication').waitFor();
    await page.getByLabel('Model name', { exact: true }).fill('Invented literature-style model (test)');
    await page.getByLabel(/^Source: the publication/).fill('Invented for the UI test; adults on a general ward');
    await page.getByLabel('Covariate range 1: from').fill('40');
    await page.getByLabel('Covariate range 1: to').fill('130');
    await page.getByLabel('CL published value (L/h)').fill('3.5');
    await page.getByLabel('V published value (L)').fill('50');
    await page.getByLabel('CL BSV SD').fill('0.3');
    await page.getByLabel('V BSV SD').fill('0.25');
    await page.getByLabel('a (mg/L)').fill('1');
    await page.getByLabel('b (fraction)').fill('0.15');
    await page.getByText('The model reads correctly.').waitFor();
    await page.getByRole('heading', { name: '1. Prior model' }).scrollIntoViewIfNeeded();
    await s.shot('09b-dosing-literature-form');
    await accessible('Dosing (literature model form)');
    await page.getByRole('button', { name: 'Compute dose advice' }).click();
    await page.getByText(/^Model: Invented literature-style model \(test\) \(model spec, 1cmt\)/).waitFor({ timeout: 60_000 });
    expect(await page.getByText(/^Model: .*source: Invented for the UI test/).count()).toBe(1);

    // Then the site fit as the prior: advice for the demo patient.
    await prior.selectOption((await prior.locator('option', { hasText: '1-cmt quick' }).first().getAttribute('value')) as string);
    await page.getByRole('button', { name: 'Compute dose advice' }).click();
    await page.getByText(/^Model: .*\(site fit, 1cmt\)/).waitFor({ timeout: 60_000 });
    expect(await verdict.textContent()).toMatch(/Recommended regimen: .*mg every \d+ h|Blocked/);
    const table = page.getByRole('table').filter({ hasText: /Regimens ranked|Evaluated regimen/ });
    expect(await table.getByRole('row').nth(1).textContent()).toMatch(/\d+ %/);
    expect(await page.getByRole('img', { name: /Forecast concentration over time with 80 % and 95 % credible bands/ }).count()).toBe(1);
    expect(await page.getByRole('table').filter({ hasText: 'prior' }).first().textContent()).toMatch(/CL \(L\/h\)/);

    // What-if: a regimen typed in is redrawn in the page.
    await page.getByLabel('Dose (mg)').fill('1500');
    await page.getByLabel('Every (h)').fill('12');
    await page.getByRole('button', { name: 'Draw', exact: true }).click();
    await page.getByText(/What-if 1500 mg every 12 h/).waitFor({ timeout: 30_000 });
    await page.locator('#forecast-chart').scrollIntoViewIfNeeded();
    await s.shot('10-dosing-whatif');
    await accessible('Dosing (advice)');

    // Print the dosing report to PDF and read it back.
    await page.getByLabel(/Reviewing clinician/).fill('Dr Reviewer (invented)');
    await page.evaluate('window.print = () => undefined');
    await page.getByRole('button', { name: 'Print the dosing report' }).click();
    await page.waitForTimeout(300);
    const pdf = path.join(ARTIFACTS, 'dosing-report.pdf');
    await page.pdf({ path: pdf, format: 'A4', printBackground: true, margin: { top: '12mm', bottom: '12mm', left: '12mm', right: '12mm' } });
    const text = execFileSync('pdftotext', ['-layout', pdf, '-'], { encoding: 'utf8' });
    expect(text).toContain('Plateau dosing report');
    expect(text).toContain('demo bed 4 (invented patient)');
    expect(text).toMatch(/Recommended: .*mg every|BLOCKED/);
    expect(text).toContain('1-cmt quick');
    expect(text).toContain('decision support for qualified clinicians');
    expect(text).toContain('Reviewing clinician: Dr Reviewer (invented)');
    expect(text).toMatch(/Signature: _+/);
    expect(text).toContain('Rybak');
    expect(text).not.toContain('Compute dose advice');

    // The session is kept in the project.
    await page.getByRole('button', { name: 'Save to the project' }).click();
    await page.getByText(/^Saved as /).waitFor();

    // A patient can also be picked from a dataset of the project (times in hours from the first dose).
    const ds = page.getByLabel('Dataset to pick from');
    await ds.selectOption((await ds.locator('option', { hasText: 'Ward levels (imported)' }).getAttribute('value')) as string);
    await page.getByLabel('Patient in the dataset').selectOption('HX-002');
    await expect.poll(() => page.getByLabel('Patient identifier (no names)').inputValue()).toBe('HX-002');
    expect(await page.getByLabel('Times are entered as').inputValue()).toBe('hours');
    expect(await page.getByLabel('Dose 1 amount (mg)').inputValue()).toBe('1250');
    expect(await page.getByLabel('Level 1 concentration (mg/L)').inputValue()).toMatch(/^8\.89/);
    // Or by its ID (a site's dataset of thousands has no list): a wrong ID is named, a right one loads.
    await page.getByRole('textbox', { name: 'or its ID' }).fill('hx-003');
    await page.getByRole('button', { name: 'Load the patient' }).click();
    await page.getByText(/^No patient "hx-003" in this dataset \(IDs are matched exactly, including case\)\./).waitFor();
    await page.getByRole('textbox', { name: 'or its ID' }).fill('HX-003');
    await page.getByRole('button', { name: 'Load the patient' }).click();
    await expect.poll(() => page.getByLabel('Patient identifier (no names)').inputValue()).toBe('HX-003');
    expect(await page.getByText(/^No patient "hx-003"/).count()).toBe(0);
    expect(await page.getByLabel('Patient in the dataset').inputValue()).toBe('HX-003');
    await s.shot('11-dosing-patient-by-id');

    expect(s.failures).toEqual([]);
  }, 240_000);
});
