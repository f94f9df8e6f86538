/**
 * Dose advice for a patient who is a subject of the site fit and brings no new level: the
 * posterior is that subject's post-fit draws from fit.json; a new level (or another id) runs the
 * sampler. Data: R datasets::Theoph (resources/validation/reference/theoph/export_theoph.R); mechanics only.
 */
import { mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { runCli } from '../../../main/cli/run.js';
import { captureIo } from '../../helpers/captureIo.js';
import { fitTheophInto, theophCsv } from '../../helpers/theophFit.js';



describe('dosing a fitted subject from its post-fit draws', () => {
  const dir = mkdtempSync(path.join(os.tmpdir(), 'plateau-postfit-'));
  let fit: { individual: Array<{ subject: string; draws: Record<string, number[]> }> };
  // Subject 1 of Theoph: its dose and levels as the fit saw them.
  const rows = readFileSync(theophCsv, 'utf8').trim().split('\n').slice(1).map((l) => l.split(','));
  const s1 = rows.filter((r) => r[0] === '1');
  const dose = s1.find((r) => r[2] === 'dose')!;
  const levels = s1.filter((r) => r[2] === 'level').map((r) => ({ time_h: Number(r[1]), conc_mg_L: Number(r[5]) }));
  const patient = (id: string, lv: Array<{ time_h: number; conc_mg_L: number }>) => ({
    id,
    covariates: { weight_kg: Number(dose[9]) },
    doses: [{ time_h: Number(dose[1]), amount_mg: Number(dose[3]), route: 'oral' }],
    levels: lv,
  });
  const advise = async (name: string, p: object, json = true) => {
    writeFileSync(path.join(dir, name), JSON.stringify(p));
    const t = captureIo(dir);
    const code = await runCli(['dose', '--model', 'fit.json', '--patient', name, '--seed', '2', ...(json ? ['--json'] : [])], t.io);
    return { code, out: t.out() };
  };

  beforeAll(async () => {
    fit = await fitTheophInto(dir);
  }, 120_000);

  it('uses the draws, says so in the provenance, the notes and the printed advice', async () => {
    const r = await advise('s1.json', patient('1', levels.slice(2, 5)));
    const a = JSON.parse(r.out);
    expect(a.posterior.diagnostics.method).toBe('post-fit');
    expect(a.posterior.diagnostics.postFitSubject).toBe('1');
    const draws = fit.individual.find((e) => e.subject === '1')!.draws;
    expect(a.posterior.nDraws).toBe(draws.CL.length);
    expect(a.model.posteriorFrom).toMatch(/subject 1/);
    expect(a.warnings.some((w: { code: string }) => w.code === 'post-fit-draws')).toBe(true);
    // The advice's posterior mean is the mean of the fit's draws (mapped through eta and back).
    const meanCl = draws.CL.reduce((s, v) => s + v, 0) / draws.CL.length;
    expect(Math.abs(a.posterior.mean.CL / meanCl - 1)).toBeLessThan(1e-3);
    const text = await advise('s1.json', patient('1', levels.slice(2, 5)), false);
    expect(text.out).toMatch(/post-fit draws of subject 1/);
  }, 60_000);

  it('runs the sampler when the patient brings a level the fit did not see, or is not a fitted subject', async () => {
    const extra = await advise('s1new.json', patient('1', [...levels.slice(2, 5), { time_h: 30, conc_mg_L: 2.1 }]));
    expect(JSON.parse(extra.out).posterior.diagnostics.method).toBe('mcmc');
    const other = await advise('other.json', patient('new patient (invented)', levels.slice(2, 5)));
    expect(JSON.parse(other.out).posterior.diagnostics.method).toBe('mcmc');
  }, 60_000);
});
