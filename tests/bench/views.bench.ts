/**
 * Views benchmark, in Debian's Chromium against the real web host (dist/ must be built): time to
 * first paint of the app and until the frame is usable, and the Dosing what-if redraw (typing a
 * dose until the curve and its table are redrawn: the engine's forecast over 2000 posterior
 * draws in the page, then the chart). Figures only; nothing is asserted. The demo patient and
 * the example model are invented (example, not for clinical use).
 *
 * Results with 1000 patients: a SIMULATION, not patient data. The invented TDM design of
 * workloads.ts (1000 patients, levels simulated from its two-compartment truth) is fitted by the
 * engine directly with short settings (30 search + 20 averaging iterations, shortened post-fit
 * steps), saved in the bench project, and the time from opening Results to the estimates and
 * every plot drawn is measured in the page.
 */
import { spawn } from 'node:child_process';
import { existsSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';
import { chromium } from 'playwright-core';
import { parseModelSpec } from '../../engine/spec/modelSpec.js';
import { addPosthoc } from '../../main/services/fitPosthoc.js';
import { fitDataset } from '../../main/services/fitService.js';
import { ProjectStore } from '../../main/services/projectStore.js';
import { tdmDataset, tdmFit } from './workloads.js';

interface Figure { name: string; value: number; unit: string; target?: string; note?: string }

// dist/tests/bench -> the app root.
const ROOT = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..', '..', '..');
const CHROMIUM = '/usr/bin/chromium';
const ARGS = ['--headless', '--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run', '--disable-background-networking', '--disable-component-update', '--disable-sync'];

const median = (x: number[]) => {
  const s = [...x].sort((a, b) => a - b);
  return s.length % 2 ? s[(s.length - 1) / 2] : (s[s.length / 2 - 1] + s[s.length / 2]) / 2;
};

/** The demo project plus a finished 1000-patient fit (simulation, short settings) saved in it. */
async function projectWithLargeFit(dir: string, figures: Figure[]): Promise<string> {
  const store = await ProjectStore.open(dir, { create: 'demo', resourcesDir: path.join(ROOT, 'resources') });
  try {
    const dataset = tdmDataset(1000, 11);
    const datasetId = await store.addDataset('SIMULATION: 1000 invented patients (bench)', dataset, { source: 'tests/bench/workloads.ts tdmDataset(1000, 11)' });
    const specJson = { ...JSON.parse(JSON.stringify(tdmFit)), name: 'bench 2-cmt (simulation)', estimation: { searchMinIterations: 30, searchMaxIterations: 30, autoEndSearch: false, averagingIterations: 20 } };
    const modelId = await store.saveModel('bench 2-cmt (simulation)', specJson);
    const t0 = Date.now();
    const outcome = await fitDataset(dataset, parseModelSpec(specJson), { seed: 1 });
    const record = await addPosthoc(outcome, { posthoc: { conditional: { warmup: 50, maxIterations: 300 }, importance: { samplesPerSubject: 1000 }, diagnostics: { replicates: 50 } } });
    figures.push({ name: '1000-patient fit for the Results figure (simulation, 30+20 iterations, short post-fit; engine in-process)', value: (Date.now() - t0) / 1000, unit: 's' });
    return await store.saveFit({ name: 'SIMULATION 1000 patients, bench 2-cmt, seed 1', datasetId, modelId, seed: 1 }, JSON.parse(JSON.stringify(record)) as Record<string, unknown>);
  } finally {
    await store.close();
  }
}

async function run(): Promise<Figure[]> {
  if (!existsSync(CHROMIUM)) throw new Error(`${CHROMIUM} is missing: apt-get install -y chromium`);
  const project = mkdtempSync(path.join(tmpdir(), 'plateau-bench-'));
  const figures: Figure[] = [];
  const largeFitId = await projectWithLargeFit(project, figures);
  const profile = mkdtempSync(path.join(tmpdir(), 'plateau-bench-chromium-'));
  const host = spawn(process.execPath, [path.join(ROOT, 'dist', 'main', 'start.js'), '--web', '--no-open', '--port', '0', '--project', project], { cwd: ROOT, stdio: ['ignore', 'pipe', 'pipe'] });
  let out = '';
  host.stdout.on('data', (d) => (out += String(d)));
  host.stderr.on('data', (d) => (out += String(d)));
  const context = await chromium.launchPersistentContext(profile, { executablePath: CHROMIUM, headless: true, args: ARGS, viewport: { width: 1366, height: 768 } });
  try {
    const url = await new Promise<string>((resolve, reject) => {
      const t = setTimeout(() => reject(new Error(`web host did not start:\n${out}`)), 20_000);
      const check = () => {
        const m = /running at (http:\/\/\S+)/.exec(out);
        if (m) {
          clearTimeout(t);
          resolve(m[1]);
        }
      };
      host.stdout.on('data', check);
      check();
    });
    const page = context.pages()[0] ?? (await context.newPage());

    // First paint: a cold load (new page) and warm reloads.
    const fcp: number[] = [];
    const ready: number[] = [];
    for (let k = 0; k < 4; k++) {
      const t0 = Date.now();
      if (k === 0) await page.goto(url);
      else await page.reload();
      await page.getByRole('dialog').or(page.getByRole('navigation', { name: 'Views' })).first().waitFor();
      await page.getByText(/^Project: /).waitFor();
      ready.push(Date.now() - t0);
      fcp.push(Number(await page.evaluate(`performance.getEntriesByName('first-contentful-paint')[0]?.startTime ?? NaN`)));
    }
    figures.push({ name: 'first contentful paint, cold', value: fcp[0], unit: 'ms', target: '< 1500' });
    figures.push({ name: 'first contentful paint, reload (median of 3)', value: median(fcp.slice(1)), unit: 'ms', target: '< 1500' });
    figures.push({ name: 'app ready (frame, project and caution loaded), cold', value: ready[0], unit: 'ms', target: '< 1500' });

    await page.getByRole('checkbox', { name: /I have read this/ }).check();
    await page.getByRole('button', { name: 'Continue to Plateau' }).click();

    // Results for the finished 1000-patient fit (the project's last fit, so Results opens it):
    // from the click on Results to the estimates and the first plots drawn, then every plot
    // (the print layout draws all of them: goodness of fit, residuals, NPDE, VPCs, the individual
    // fits of every subject up to 600, covariates, convergence; when the target was set it drew
    // one page of 12 individual fits).
    const navLarge = page.getByRole('navigation', { name: 'Views' });
    const tLarge = Date.now();
    await navLarge.getByRole('button', { name: /^Results/ }).click();
    await page.getByRole('heading', { name: /SIMULATION 1000 patients/ }).waitFor({ timeout: 120_000 });
    await page.getByRole('table').filter({ hasText: 'Population estimates' }).waitFor({ timeout: 120_000 });
    await page.getByRole('img', { name: 'Observed against individual predictions' }).waitFor({ timeout: 120_000 });
    await page.evaluate('new Promise((r) => requestAnimationFrame(() => requestAnimationFrame(r)))');
    const openMs = Date.now() - tLarge;
    figures.push({ name: 'Results open, 1000-patient fit (simulation): estimates and the first plots drawn', value: openMs, unit: 'ms', target: '< 1500', note: `fit ${largeFitId}` });
    await page.evaluate('window.print = () => undefined');
    const tEvery = Date.now();
    await page.getByRole('button', { name: 'Print the fit report' }).click();
    await page.getByRole('img', { name: /^Convergence of / }).first().waitFor({ timeout: 120_000 });
    await page.getByRole('img', { name: 'Prediction-corrected visual predictive check' }).waitFor({ timeout: 120_000 });
    await page.evaluate('new Promise((r) => requestAnimationFrame(() => requestAnimationFrame(r)))');
    figures.push({ name: 'Results, 1000-patient fit (simulation): then every plot drawn (print layout)', value: Date.now() - tEvery, unit: 'ms' });
    figures.push({ name: 'finished 1000-patient fit to the Results view with all plots drawn (simulation)', value: openMs + (Date.now() - tEvery), unit: 'ms', target: '< 1500', note: '600 individual fits in the print layout (target set for 12)' });
    await page.evaluate('window.dispatchEvent(new Event("afterprint"))');

    // Dosing what-if: the example model (blocked, shown on request), the demo patient.
    await page.getByRole('navigation', { name: 'Views' }).getByRole('button', { name: /^Dosing/ }).click();
    const prior = page.getByLabel('Model the advice is based on');
    await prior.selectOption((await prior.locator('option', { hasText: 'Example vancomycin-like' }).getAttribute('value')) as string);
    await page.getByLabel(/Or load a patient file/).setInputFiles(path.join(ROOT, 'resources', 'demo', 'patient.json'));
    await page.waitForFunction(`document.querySelector('input[autocomplete=off]')?.value !== ''`);
    await page.getByRole('button', { name: 'Compute dose advice' }).click();
    await page.getByRole('button', { name: /Show the regimens anyway/ }).click({ timeout: 60_000 });
    await page.getByLabel('Dose (mg)').waitFor({ timeout: 60_000 });
    const tPrep = Date.now();
    await page.getByLabel('Dose (mg)').fill('1250');
    await page.getByText(/What-if 1250 mg/).waitFor({ timeout: 60_000 });
    figures.push({ name: 'what-if: first redraw (rebuilds the posterior draws in the page)', value: Date.now() - tPrep, unit: 'ms' });
    const redraw: number[] = [];
    for (let k = 0; k < 10; k++) {
      const dose = 1000 + 250 * (k % 6);
      // Input event to the second animation frame after it: Svelte update, forecast, chart drawn.
      const ms = Number(
        await page.evaluate(`new Promise((resolve) => {
          const input = [...document.querySelectorAll('label')].find((l) => l.textContent.startsWith('Dose (mg)')).querySelector('input');
          const t0 = performance.now();
          input.value = '${dose}';
          input.dispatchEvent(new Event('input', { bubbles: true }));
          requestAnimationFrame(() => requestAnimationFrame(() => resolve(performance.now() - t0)));
        })`),
      );
      redraw.push(ms);
    }
    figures.push({ name: 'what-if redraw (input to drawn curve, median of 10)', value: median(redraw), unit: 'ms', target: '< 100' });
    figures.push({ name: 'what-if redraw, slowest of 10', value: Math.max(...redraw), unit: 'ms' });

    // Results: a fit of the demo project (48 invented patients, its demo model and default
    // settings) queued and finished, then opened: estimates and the default plots, then every plot.
    const nav = page.getByRole('navigation', { name: 'Views' });
    await nav.getByRole('button', { name: /^Fit queue/ }).click();
    const model = page.getByLabel('Model');
    await model.selectOption((await model.locator('option', { hasText: 'Demo one-compartment' }).getAttribute('value')) as string);
    await page.getByLabel(/^Seeds of this fit/).fill('1');
    const tFit = Date.now();
    await page.getByRole('button', { name: 'Add to the queue' }).click();
    await page.getByRole('button', { name: /Open the results of/ }).first().waitFor({ timeout: 600_000 });
    figures.push({ name: 'demo fit through the queue (48 subjects, fit + post-fit)', value: (Date.now() - tFit) / 1000, unit: 's' });
    const tOpen = Date.now();
    await page.getByRole('button', { name: /Open the results of/ }).first().click();
    await page.getByRole('table').filter({ hasText: 'Population estimates' }).waitFor({ timeout: 60_000 });
    await page.getByRole('img', { name: 'Observed against individual predictions' }).waitFor();
    await page.evaluate('new Promise((r) => requestAnimationFrame(() => requestAnimationFrame(r)))');
    figures.push({ name: 'Results view open with estimates and the first plots (demo fit, 48 subjects)', value: Date.now() - tOpen, unit: 'ms', target: '< 1500' });
    await page.evaluate('window.print = () => undefined');
    const tAll = Date.now();
    await page.getByRole('button', { name: 'Print the fit report' }).click();
    await page.getByRole('img', { name: /^Convergence of / }).first().waitFor();
    await page.evaluate('new Promise((r) => requestAnimationFrame(() => requestAnimationFrame(r)))');
    figures.push({ name: 'Results: every plot drawn at once (print layout, demo fit)', value: Date.now() - tAll, unit: 'ms' });
    return figures;
  } finally {
    await context.close();
    host.kill('SIGTERM');
    await new Promise((r) => setTimeout(r, 300));
    rmSync(profile, { recursive: true, force: true });
    rmSync(project, { recursive: true, force: true });
  }
}

export const suite = { name: 'views', run };
