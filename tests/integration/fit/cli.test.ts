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

describe('plateau fit', () => {
  const dir = mkdtempSync(path.join(os.tmpdir(), 'plateau-fit-'));
  writeFileSync(path.join(dir, 'spec.json'), JSON.stringify(spec));

  it('fits, prints a summary and writes fit.json with the documented fields', async () => {
    const t = captureIo(dir);
    const code = await runCli(['fit', '--data', theophCsv, '--model', 'spec.json', '--seed', '7', '--out', 'fit.json', '--progress'], t.io);
    expect(t.err()).toMatch(/\[seed \d+ search \d+\/\d+\] CL=/);
    expect(code).toBe(0);
    const text = t.out();
    expect(text).toContain('CL (typical)');
    expect(text).toContain('BSV ka (omega)');
    const fit = JSON.parse(readFileSync(path.join(dir, 'fit.json'), 'utf8'));
    for (const key of ['engineVersion', 'seed', 'dataHash', 'spec', 'population', 'individual', 'trajectory', 'timing', 'warnings']) expect(fit).toHaveProperty(key);
    expect(fit.seed).toBe(7);
    expect(fit.engineVersion).toBe('0.1.0');
    expect(fit.dataHash).toMatch(/^sha256:[0-9a-f]{64}$/);
    expect(fit.trajectory.values).toHaveLength(fit.trajectory.iterations);
    expect(fit.population.find((e: { kind: string; parameter: string }) => e.kind === 'typical' && e.parameter === 'CL').estimate).toBeGreaterThan(0.03);
  });

  it('explains a model that does not match the data (ka missing for oral doses)', async () => {
    writeFileSync(path.join(dir, 'noka.json'), JSON.stringify({ ...spec, parameters: { CL: spec.parameters.CL, V: spec.parameters.V } }));
    const t = captureIo(dir);
    const code = await runCli(['fit', '--data', theophCsv, '--model', 'noka.json'], t.io);
    expect(code).toBe(1);
    expect(t.err()).toMatch(/oral doses .* no absorption rate ka/);
  });

  it('rejects a bad estimation setting with its JSON path', async () => {
    writeFileSync(path.join(dir, 'bad.json'), JSON.stringify({ ...spec, estimation: { chains: 0 } }));
    const t = captureIo(dir);
    const code = await runCli(['fit', '--data', theophCsv, '--model', 'bad.json'], t.io);
    expect(code).toBe(1);
    expect(t.err()).toContain('estimation.chains');
  });

  it('refuses an --out it cannot write before any fit starts', async () => {
    const t = captureIo(dir);
    const started = Date.now();
    const code = await runCli(['fit', '--data', theophCsv, '--model', 'spec.json', '--out', 'no-such-folder/fit.json'], t.io);
    expect(code).toBe(1);
    expect(t.err()).toMatch(/cannot write .*fit\.json: the folder .*no-such-folder does not exist/);
    expect(t.err()).not.toContain('[seed');
    expect(Date.now() - started).toBeLessThan(2000);
  });

  it('needs --data and --model', async () => {
    const t = captureIo(dir);
    expect(await runCli(['fit', '--model', 'spec.json'], t.io)).toBe(2);
    expect(t.err()).toContain('--data');
  });
});
