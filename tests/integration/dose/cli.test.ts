import { mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import { runCli } from '../../../main/cli/run.js';
import { captureIo } from '../../helpers/captureIo.js';

const ROOT = path.resolve(__dirname, '../../..');
const EXAMPLE_MODEL = path.join(ROOT, 'resources/models/example-vancomycin-1cmt.json');
const PATIENT = path.join(__dirname, 'fixtures/patient-vanco.json');
const CAUTION = JSON.parse(readFileSync(path.join(ROOT, 'resources/cautions/dosing.json'), 'utf8')).text as string;


// A model spec with its source and ranges (invented values, for this test only).
const SPEC = {
  name: 'integration-test model (invented values)',
  source: 'invented for the integration test',
  structure: '1cmt',
  parameters: { CL: { typical: 3.5, bsv: 0.35 }, V: { typical: 50, bsv: 0.25 } },
  covariates: [
    { parameter: 'CL', covariate: 'crcl_mL_min', relation: 'power', reference: 80, coefficient: 0.75, fixed: true },
    { parameter: 'V', covariate: 'WT', relation: 'power', reference: 70, coefficient: 1, fixed: true },
  ],
  residual: { model: 'combined', a: 1, b: 0.15 },
  covariateRanges: { crcl_mL_min: [20, 150], WT: [40, 130] },
};

describe('plateau dose', () => {
  const dir = mkdtempSync(path.join(os.tmpdir(), 'plateau-dose-'));
  writeFileSync(path.join(dir, 'model.json'), JSON.stringify(SPEC));

  it('prints the posterior, ranked regimens and the caution, and writes advice.json per the contract', async () => {
    const t = captureIo(dir);
    const code = await runCli(['dose', '--model', 'model.json', '--patient', PATIENT, '--target', 'vancomycin-auc24', '--out', 'advice.json', '--seed', '4'], t.io);
    expect(t.err()).toBe('');
    expect(code).toBe(0);
    const text = t.out();
    expect(text.startsWith('CAUTION')).toBe(true);
    // Issue 9 finding 7: the caution once at the top (and once in advice.json), not twice.
    expect(text.split(CAUTION.slice(0, 40)).length - 1).toBe(1);
    expect(text).toContain("Patient's parameters (2000 draws");
    expect(text).toContain('Advised regimens');
    expect(text).toContain('Rybak');
    const a = JSON.parse(readFileSync(path.join(dir, 'advice.json'), 'utf8'));
    for (const k of ['map', 'mean', 'sd', 'q05', 'q95']) expect(a.posterior[k]).toHaveProperty('CL');
    expect(a.regimens[0]).toHaveProperty('doseMg');
    expect(a.regimens[0]).toHaveProperty('intervalH');
    expect(a.regimens[0]).toHaveProperty('durationH');
    expect(a.regimens[0]).toHaveProperty('pTarget');
    expect(a.regimens[0]).toHaveProperty('pToxic');
    expect(a.regimens[0].metrics.auc24).toHaveProperty('q975');
    expect(Array.isArray(a.warnings)).toBe(true);
    expect(a.caution).toBe(CAUTION);
    expect(a.model).toMatchObject({ kind: 'model spec', source: 'invented for the integration test' });
    expect(a.model.covariatesUsed.WT).toBe('weight_kg (as WT)');
    expect(a.seed).toBe(4);
    expect(a.engineVersion).toBe('0.1.0');
    expect(a.patient.clockOrigin).toBe('2026-03-02T08:00');
  });

  it('--evaluate returns the one regimen; --json prints the same JSON', async () => {
    const t = captureIo(dir);
    const code = await runCli(['dose', '--model', 'model.json', '--patient', PATIENT, '--target', 'vancomycin-auc24', '--evaluate', '1250mg q12h 1.5h', '--json', '--peak-after', '1', '--next-dose-h', '40'], t.io);
    expect(code).toBe(0);
    const a = JSON.parse(t.out());
    expect(a.regimens).toHaveLength(1);
    expect(a.regimens[0]).toMatchObject({ doseMg: 1250, intervalH: 12, durationH: 1.5 });
    expect(a.regimens[0].metrics.peakAt.median).toBeLessThan(a.regimens[0].metrics.peak.median);
    expect(a.patient).toMatchObject({ nextDoseH: 40, nextDoseAssumed: false });
    expect(a.forecast.futureDoses[0].timeH).toBe(40);
    expect(a.caution).toBe(CAUTION);
  });

  it('refuses to advise with an example model (exit 1) and shows the table only on request', async () => {
    const t = captureIo(dir);
    expect(await runCli(['dose', '--model', EXAMPLE_MODEL, '--patient', PATIENT, '--target', 'vancomycin-auc24', '--out', 'blocked.json'], t.io)).toBe(1);
    expect(t.out()).toContain('BLOCKED: NO DOSE ADVICE');
    expect(t.out()).toContain('CAUTION');
    expect(t.out()).not.toContain('Advised regimens');
    const a = JSON.parse(readFileSync(path.join(dir, 'blocked.json'), 'utf8'));
    expect(a.status).toBe('blocked');
    expect(a.regimens).toEqual([]);
    const t2 = captureIo(dir);
    // Issue 9 finding 4: --override-blocks exited 0 on blocked advice; blocked is exit 1 either way.
    expect(await runCli(['dose', '--model', EXAMPLE_MODEL, '--patient', PATIENT, '--target', 'vancomycin-auc24', '--override-blocks'], t2.io)).toBe(1);
    expect(t2.err()).toContain('BLOCKED');
    expect(t2.out()).toContain('BLOCKED (regimens shown on request');
    expect(t2.out()).toContain('Advised regimens');
  });

  it('takes the user\'s own target file and a --mic override', async () => {
    writeFileSync(
      path.join(dir, 'my-target.json'),
      JSON.stringify({ id: 'ward-7', label: 'ward 7 trough 10-15', source: 'ward 7 protocol 2026 (invented for the test)', goals: [{ metric: 'trough', min: 10, max: 15 }], toxic: [{ metric: 'trough', max: 20 }], regimen: { strengthMg: 250, minDoseMg: 500, maxDoseMg: 2000, intervalsH: [12], durationsH: [1, 2], maxRateMgPerH: 1000 } }),
    );
    const t = captureIo(dir);
    expect(await runCli(['dose', '--model', 'model.json', '--patient', PATIENT, '--target', 'my-target.json', '--json'], t.io)).toBe(0);
    const a = JSON.parse(t.out());
    expect(a.target).toMatchObject({ id: 'ward-7', localProtocol: 'check local protocol' });
    expect(a.regimens.every((r: { intervalH: number }) => r.intervalH === 12)).toBe(true);
    const t2 = captureIo(dir);
    expect(await runCli(['dose', '--model', 'model.json', '--patient', PATIENT, '--target', 'vancomycin-auc24', '--mic', '2', '--evaluate', '1000mg q12h 1h', '--json'], t2.io)).toBe(0);
    const b = JSON.parse(t2.out());
    expect(b.target.micMgL).toBe(2);
    // AUC24/MIC 400-600 with MIC 2 means AUC24 800-1200: 2000 mg a day cannot reach it here.
    expect(b.regimens[0].pTarget).toBeLessThan(0.05);
  });

  it('without --target evaluates the current regimen only', async () => {
    const t = captureIo(dir);
    expect(await runCli(['dose', '--model', 'model.json', '--patient', PATIENT, '--json'], t.io)).toBe(0);
    const a = JSON.parse(t.out());
    expect(a.regimens).toHaveLength(1);
    expect(a.regimens[0]).toMatchObject({ doseMg: 1000, intervalH: 12, durationH: 1 });
    expect(a.warnings.some((w: { code: string }) => w.code === 'no-target')).toBe(true);
  });

  it('reports bad input clearly', async () => {
    writeFileSync(path.join(dir, 'bad.json'), JSON.stringify({ id: 'b', covariates: { weight_lb: 150 }, doses: [{ time_h: 0, amount_mg: 1000, duration_h: 2 }, { time_h: 1, amount_mg: 1000, duration_h: 1 }], levels: [] }));
    const t = captureIo(dir);
    expect(await runCli(['dose', '--model', 'model.json', '--patient', 'bad.json', '--target', 'vancomycin-auc24'], t.io)).toBe(1);
    expect(t.err()).toContain('bad.json');
    expect(t.err()).toContain('covariates.weight_lb: unknown unit');
    expect(t.err()).toContain('overlapping');
    const t2 = captureIo(dir);
    expect(await runCli(['dose', '--model', 'model.json', '--patient', PATIENT, '--target', 'no-such-target'], t2.io)).toBe(1);
    expect(t2.err()).toContain('vancomycin-auc24');
    const t3 = captureIo(dir);
    expect(await runCli(['dose', '--model', 'model.json', '--patient', PATIENT, '--evaluate', '1000 q12h'], t3.io)).toBe(2);
    expect(t3.err()).toContain('cannot read the regimen');
    writeFileSync(path.join(dir, 'nocov.json'), JSON.stringify({ id: 'n', covariates: { weight_kg: 70 }, doses: [{ time_h: 0, amount_mg: 1000, duration_h: 1 }] }));
    const t4 = captureIo(dir);
    expect(await runCli(['dose', '--model', 'model.json', '--patient', 'nocov.json', '--target', 'vancomycin-auc24'], t4.io)).toBe(1);
    expect(t4.err()).toContain('crcl_mL_min');
  });

  it('carries the caution on every exit path, and writes a JSON error record with --out / --json', async () => {
    writeFileSync(path.join(dir, 'invalid.json'), JSON.stringify({ id: 'x', covariates: { weight_kg: 70 }, doses: [{ time_h: 0, amount_mg: 1000, duration_h: 1 }], levels: [{ time_h: 11, conc_mg_L: 'NaN' }] }));
    const t = captureIo(dir);
    expect(await runCli(['dose', '--model', 'model.json', '--patient', 'invalid.json', '--target', 'vancomycin-auc24', '--out', 'error.json'], t.io)).toBe(1);
    expect(t.err()).toContain(CAUTION);
    expect(t.err()).toContain('levels[0].conc_mg_L: must be a number, got "NaN" (not a number)');
    const rec = JSON.parse(readFileSync(path.join(dir, 'error.json'), 'utf8'));
    expect(rec).toMatchObject({ status: 'error', caution: CAUTION, engineVersion: '0.1.0' });
    expect(rec.errors.some((e: string) => e.includes('not a number'))).toBe(true);
    // --json prints the record; a usage error (bad --draws) carries the caution too.
    const t2 = captureIo(dir);
    expect(await runCli(['dose', '--model', 'model.json', '--patient', 'invalid.json', '--json'], t2.io)).toBe(1);
    expect(JSON.parse(t2.out())).toMatchObject({ status: 'error', caution: CAUTION });
    const t3 = captureIo(dir);
    expect(await runCli(['dose', '--model', 'model.json', '--patient', PATIENT, '--draws', '5', '--out', 'usage.json'], t3.io)).toBe(2);
    expect(t3.err()).toContain(CAUTION);
    expect(JSON.parse(readFileSync(path.join(dir, 'usage.json'), 'utf8')).errors[0]).toContain('--draws');
    const t4 = captureIo(dir);
    expect(await runCli(['dose', '--model', 'missing-model.json', '--patient', PATIENT], t4.io)).toBe(1);
    expect(t4.err()).toContain(CAUTION);
  });

  it('issue 9 finding 8: swapping --model and --patient (the demo files) names both kinds', async () => {
    const demoPatient = path.join(ROOT, 'resources/demo/patient.json');
    const demoModel = path.join(ROOT, 'resources/demo/ward-model.json');
    const t = captureIo(dir);
    expect(await runCli(['dose', '--model', demoPatient, '--patient', demoModel], t.io)).toBe(1);
    expect(t.err()).toContain('this looks like a patient file; --model expects a model spec or fit.json (were --model and --patient swapped?)');
    expect(t.err()).not.toContain('undefined');
    const t2 = captureIo(dir);
    expect(await runCli(['dose', '--model', demoModel, '--patient', path.join(ROOT, 'resources/targets/vancomycin-auc24.json')], t2.io)).toBe(1);
    expect(t2.err()).toContain('this looks like a target file; --patient expects a patient file');
  });

  it('issue 11 finding 6: option bounds are stated in --help and enforced before any work', async () => {
    const h = captureIo(dir);
    expect(await runCli(['dose', '--help'], h.io)).toBe(0);
    for (const text of ['100 to 100000', '0.1-10000 mg', 'at most 400 dose steps', '> 0 to 1024']) expect(h.out()).toContain(text);
    for (const [flag, value] of [['--draws', '1000000000'], ['--mic', '1e308'], ['--below', '-1'], ['--peak-after', '1e9'], ['--next-dose-h', '1e9']]) {
      const t = captureIo(dir);
      expect(await runCli(['dose', '--model', 'model.json', '--patient', PATIENT, '--target', 'vancomycin-auc24', flag, value], t.io)).toBe(2);
      expect(t.err()).toContain(flag);
    }
  });
});
