/**
 * The demo walk-through of README "Usage" (invented scenario, simulated data: resources/demo,
 * made by resources/demo/make-demo.mjs from resources/models/example-vancomycin-1cmt.json).
 * Simulation recovery, labelled as such: the fit should land near the values the demo data were
 * simulated from; the dose advice must refuse to advise from an example model unless asked.
 */
import { mkdtempSync, readFileSync } from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { runCli } from '../../main/cli/run.js';
import { captureIo } from '../helpers/captureIo.js';
import { ensureBuilt } from './services/build.js';

// `plateau fit` runs its seeds in the compiled engine worker.
beforeAll(() => ensureBuilt(), 300_000);

const root = path.resolve(__dirname, '../..');

describe('demo walk-through (invented data)', () => {
  it('check, fit and dose run end to end on the demo ward data', async () => {
    const dir = mkdtempSync(path.join(os.tmpdir(), 'plateau-demo-'));
    const data = path.join(root, 'resources/demo/ward-levels.csv');

    const c = captureIo(dir);
    expect(await runCli(['check', '--data', data, '--report', 'report.json'], c.io)).toBe(0);
    const report = JSON.parse(readFileSync(path.join(dir, 'report.json'), 'utf8'));
    expect(report.summary).toMatchObject({ patients: 48, levels: 92 });

    const f = captureIo(dir);
    expect(await runCli(['fit', '--data', data, '--model', path.join(root, 'resources/demo/ward-model.json'), '--out', 'fit.json'], f.io)).toBe(0);
    const fit = JSON.parse(readFileSync(path.join(dir, 'fit.json'), 'utf8'));
    const est = (kind: string, parameter: string) => fit.population.find((e: { kind: string; parameter: string }) => e.kind === kind && e.parameter === parameter);
    // Simulated from CL 3.5 L/h, V 50 L, CrCl exponent 0.75 (example-vancomycin-1cmt.json).
    expect(Math.abs(est('typical', 'CL').estimate / 3.5 - 1)).toBeLessThan(0.15);
    expect(Math.abs(est('typical', 'V').estimate / 50 - 1)).toBeLessThan(0.15);
    expect(est('typical', 'CL').se).toBeGreaterThan(0);
    expect(fit.covariateRanges.crcl_mL_min[0]).toBeGreaterThanOrEqual(30);

    const patient = path.join(root, 'resources/demo/patient.json');
    const d = captureIo(dir);
    expect(await runCli(['dose', '--model', 'fit.json', '--patient', patient, '--target', 'vancomycin-auc24', '--json'], d.io)).toBe(1);
    const blocked = JSON.parse(d.out());
    expect(blocked.status).toBe('blocked');
    expect(blocked.caution).toMatch(/qualified clinicians/);

    const o = captureIo(dir);
    await runCli(['dose', '--model', 'fit.json', '--patient', patient, '--target', 'vancomycin-auc24', '--json', '--override-blocks'], o.io);
    const shown = JSON.parse(o.out());
    expect(shown.status).toBe('blocked-shown-on-request');
    expect(shown.regimens.length).toBeGreaterThan(0);
    expect(shown.regimens[0].pTarget).toBeGreaterThan(0.5);
  }, 120_000);
});
