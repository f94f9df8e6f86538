/**
 * A site fit feeds dose advice: plateau fit on the Theoph data (R datasets::Theoph, exported by
 * resources/validation/reference/theoph/export_theoph.R), then plateau dose with its fit.json as the prior.
 * Mechanics only: the patient is invented, and Theoph doses are mg/kg.
 */
import { mkdtempSync, writeFileSync } from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import { runCli } from '../../../main/cli/run.js';
import { captureIo } from '../../helpers/captureIo.js';
import { fitTheophInto } from '../../helpers/theophFit.js';



describe('plateau dose with a fit.json', () => {
  it('uses the fitted estimates, records the fit provenance and checks the patient against the fitted covariate ranges', async () => {
    const dir = mkdtempSync(path.join(os.tmpdir(), 'plateau-dose-fit-'));
    const fit = await fitTheophInto(dir);
    const clFit = fit.population.find((e: { kind: string; parameter: string }) => e.kind === 'typical' && e.parameter === 'CL').estimate;

    writeFileSync(
      path.join(dir, 'patient.json'),
      JSON.stringify({ id: 'oral-1 (invented)', covariates: { weight_kg: 70 }, doses: [0, 12].map((t) => ({ time_h: t, amount_mg: 4, route: 'oral' })), levels: [{ time_h: 14, conc_mg_L: 7.5 }] }),
    );
    const t = captureIo(dir);
    const code = await runCli(['dose', '--model', 'fit.json', '--patient', 'patient.json', '--json', '--seed', '2'], t.io);
    expect(code).toBe(0);
    const a = JSON.parse(t.out());
    expect(a.model).toMatchObject({ kind: 'site fit', dataHash: fit.dataHash, engineVersion: fit.engineVersion, seed: 3 });
    // weight 70 = the reference, so the typical CL for this patient is the fitted typical CL.
    expect(a.posterior.typical.CL).toBeCloseTo(clFit, 4);
    // The fit records the range of weight_kg in its data (Theoph: 54.6-86.4 kg), so the range is known.
    expect(fit.covariateRanges.weight_kg).toEqual([54.6, 86.4]);
    expect(a.warnings.some((w: { code: string; message: string }) => w.code === 'ranges-unknown')).toBe(false);
    expect(a.regimens[0].route).toBe('oral');
    // The fit checks read the fields the estimator and the post-fit step really write.
    const has = (code: string) => a.warnings.some((w: { code: string }) => w.code === code);
    expect(typeof fit.trajectory.searchSettled).toBe('boolean');
    expect(has('fit-cap-reached')).toBe(!fit.trajectory.searchSettled);
    expect(typeof fit.uncertainty.ok).toBe('boolean');
    expect(has('fit-no-se')).toBe(!fit.uncertainty.ok || fit.population.some((e: { fixed: boolean; se: number | null }) => !e.fixed && e.se === null));
    for (const w of fit.warnings as string[]) expect(a.warnings.some((x: { message: string }) => x.message.includes(w))).toBe(true);

    // A patient heavier than anyone in the fitted data: the advice is blocked.
    writeFileSync(
      path.join(dir, 'heavy.json'),
      JSON.stringify({ id: 'oral-2 (invented)', covariates: { weight_kg: 130 }, doses: [{ time_h: 0, amount_mg: 4, route: 'oral' }], levels: [{ time_h: 2, conc_mg_L: 5 }] }),
    );
    const h = captureIo(dir);
    expect(await runCli(['dose', '--model', 'fit.json', '--patient', 'heavy.json', '--json', '--seed', '2'], h.io)).toBe(1);
    const blocked = JSON.parse(h.out());
    expect(blocked.status).toBe('blocked');
    expect(blocked.warnings.some((w: { severity: string; message: string }) => w.severity === 'block' && /weight_kg/.test(w.message))).toBe(true);
  }, 120_000);
});
