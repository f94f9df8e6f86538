/** `plateau fit` writes the post-fit fields into fit.json and runs the repeated-fit check (--repeat). */
import { mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import { runCli } from '../../../main/cli/run.js';
import { captureIo } from '../../helpers/captureIo.js';

const theophCsv = path.resolve(__dirname, '../../reference/theoph/theoph.csv');
const spec = {
  structure: '1cmt',
  parameters: { CL: { typical: 0.05, bsv: 0.3 }, V: { typical: 0.5, bsv: 0.3 }, ka: { typical: 1.5, bsv: 0.3 } },
  residual: { model: 'additive', a: 1 },
  estimation: { explorationMinIterations: 60, explorationMaxIterations: 100, averagingIterations: 50 },
};

describe('plateau fit: post-fit fields and --repeat', () => {
  const dir = mkdtempSync(path.join(os.tmpdir(), 'plateau-posthoc-'));
  writeFileSync(path.join(dir, 'spec.json'), JSON.stringify(spec));

  it('writes se, rsePercent, likelihood, per-subject conditional summaries, diagnostics and robustness', async () => {
    const t = captureIo(dir);
    const code = await runCli(['fit', '--data', theophCsv, '--model', 'spec.json', '--seed', '5', '--repeat', '2', '--out', 'fit.json'], t.io);
    expect(t.err()).toBe('');
    expect(code).toBe(0);
    const text = t.out();
    expect(text).toMatch(/Standard errors \(observed Fisher information by stochastic approximation \(Louis\)/);
    expect(text).toMatch(/-2LL \d+\.\d+ \(Monte Carlo SE/);
    expect(text).toMatch(/Robustness \(2 runs\): (stable|unstable)/);
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
    expect(fit.robustness.runs).toHaveLength(2);
    expect(fit.robustness.parameters).toHaveLength(7);
    expect(typeof fit.robustness.stable).toBe('boolean');
  }, 120_000);

  it('refuses --repeat below 2', async () => {
    const t = captureIo(dir);
    const code = await runCli(['fit', '--data', theophCsv, '--model', 'spec.json', '--repeat', '1'], t.io);
    expect(code).toBe(1);
    expect(t.err()).toMatch(/--repeat must be an integer >= 2/);
  });
});
