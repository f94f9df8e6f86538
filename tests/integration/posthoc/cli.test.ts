/** `plateau fit` writes the post-fit fields into fit.json and runs several seeds (--seeds), keeping the best. */
import { mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { runCli } from '../../../main/cli/run.js';
import { captureIo } from '../../helpers/captureIo.js';
import { ensureBuilt } from '../services/build.js';

// `plateau fit` runs its seeds in the compiled engine worker.
beforeAll(() => ensureBuilt(), 300_000);

const theophCsv = path.resolve(__dirname, '../../../resources/validation/reference/theoph/theoph.csv');
const spec = {
  structure: '1cmt',
  parameters: { CL: { typical: 0.05, bsv: 0.3 }, V: { typical: 0.5, bsv: 0.3 }, ka: { typical: 1.5, bsv: 0.3 } },
  residual: { model: 'additive', a: 1 },
  estimation: { searchMinIterations: 60, searchMaxIterations: 100, averagingIterations: 50 },
};

describe('plateau fit: post-fit fields and --seeds', () => {
  const dir = mkdtempSync(path.join(os.tmpdir(), 'plateau-posthoc-'));
  writeFileSync(path.join(dir, 'spec.json'), JSON.stringify(spec));

  it('writes se, rsePercent, likelihood, per-subject conditional summaries, diagnostics and the verdict of the seeds', async () => {
    const t = captureIo(dir);
    const code = await runCli(['fit', '--data', theophCsv, '--model', 'spec.json', '--seed', '5', '--seeds', '2', '--out', 'fit.json'], t.io);
    expect(t.err()).toBe('');
    expect(code).toBe(0);
    const text = t.out();
    expect(text).toMatch(/Standard errors \(observed Fisher information by stochastic approximation \(Louis\)/);
    expect(text).toMatch(/-2LL \d+\.\d+ \(Monte Carlo SE/);
    // Every number of the summary has its unit; each line is labelled by what it is.
    expect(text).toMatch(/\n  CL \(typical\) +\S+ L\/h\n/);
    expect(text).toMatch(/\n  BSV ka \(omega\) +\S+ SD on the log scale  CV/);
    expect(text).toMatch(/\n  residual: additive a +\S+ mg\/L\n/);
    expect(text).toMatch(/Seeds 5, 6: kept the fit from seed [56] \(lowest importance-sampling -2LL/);
    const raw = readFileSync(path.join(dir, 'fit.json'), 'utf8');
    expect(raw).not.toMatch(/NaN/);
    const fit = JSON.parse(raw);
    for (const e of fit.population) {
      expect(e.se).toBeGreaterThan(0);
      expect(e.rsePercent).toBeGreaterThan(0);
    }
    for (const key of ['minus2LL', 'mcError', 'method', 'aic', 'bic', 'bicc', 'linearised']) expect(fit.likelihood).toHaveProperty(key);
    expect(fit.likelihood.linearised.minus2LL).toBeGreaterThan(300);
    for (const s of fit.individual) for (const key of ['mode', 'mean', 'sd', 'shrinkage']) expect(Object.keys(s[key]).sort()).toEqual(['CL', 'V', 'ka']);
    expect(fit.diagnostics.observations[5]).toMatchObject({ subject: '1' });
    for (const key of ['pred', 'ipred', 'iwres', 'npde']) expect(typeof fit.diagnostics.observations[5][key]).toBe('number');
    expect(fit.diagnostics.vpc.bins.length).toBeGreaterThan(3);
    expect(fit.seeds.runs.map((r: { seed: number }) => r.seed)).toEqual([5, 6]);
    expect(fit.seeds.estimates).toHaveLength(7);
    expect(typeof fit.seeds.agree).toBe('boolean');
    expect(fit.seed).toBe(fit.seeds.keptSeed);
    const best = Math.min(...fit.seeds.runs.map((r: { minus2LL: number }) => r.minus2LL));
    expect(fit.likelihood.minus2LL).toBe(best);
    expect(fit.degeneracy.usableAsPrior).toBe(true);
  }, 120_000);

  it('refuses --seeds outside 1..16 before any work, and states the bounds in --help', async () => {
    for (const n of ['0', '17', '1e9']) {
      const t = captureIo(dir);
      const code = await runCli(['fit', '--data', theophCsv, '--model', 'spec.json', '--seeds', n], t.io);
      expect(code).not.toBe(0);
      expect(t.err()).toMatch(/--seeds/);
    }
    const h = captureIo(dir);
    await runCli(['fit', '--help'], h.io);
    expect(h.out()).toMatch(/--seeds .*integer 1\.\.16/);
  });
});
