/**
 * Issue 11 ("Damaged and hostile input") findings still open on main when this was written,
 * each as a test that failed before its fix: output paths checked before the work, bounds on
 * options, control characters in ids on stdout, and no internal exception text reaching the user.
 * Data and specs are invented (CLI behaviour tests only).
 */
import { mkdtempSync, readFileSync, writeFileSync, mkdirSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { runCli } from '../../../main/cli/run.js';
import { toErrorValue } from '../../../main/services/serviceError.js';
import { checkZipContainer } from '../../../main/worker/limits.js';
import { handleParseMessage } from '../../../main/worker/parseWorker.js';
import { captureIo } from '../../helpers/captureIo.js';
import { ensureBuilt, repoRoot } from '../services/build.js';

beforeAll(() => ensureBuilt(), 300_000);

const demo = (f: string) => path.join(repoRoot, 'resources/demo', f);

function workspace(): string {
  const dir = mkdtempSync(path.join(tmpdir(), 'plateau-hostile-'));
  writeFileSync(path.join(dir, 'model.json'), readFileSync(demo('ward-model.json')));
  writeFileSync(path.join(dir, 'data.csv'), readFileSync(demo('ward-levels.csv')));
  writeFileSync(path.join(dir, 'patient.json'), readFileSync(demo('patient.json')));
  return dir;
}

async function run(dir: string, ...argv: string[]) {
  const t = captureIo(dir);
  const code = await runCli(argv, t.io);
  return { code, out: t.out(), err: t.err() };
}

describe('output paths are checked before the work starts (issue 11, item 7)', () => {
  it('check --report, --save-mapping, --export-dataset into a missing folder: refused before the export is read', async () => {
    const dir = workspace();
    for (const flag of ['--report', '--save-mapping', '--export-dataset']) {
      const r = await run(dir, 'check', '--data', 'data.csv', flag, '/nonexistent-plateau/x.json');
      expect(r.code).toBe(1);
      expect(r.err).toContain('the folder /nonexistent-plateau does not exist');
      // Before the fix the summary of the parsed file was printed first.
      expect(r.out).not.toContain('Summary:');
    }
  }, 60_000);

  it('simulate --out into a missing folder: refused before the model and data are read', async () => {
    const dir = workspace();
    // A broken model file shows which comes first: the output path error, not the model error.
    writeFileSync(path.join(dir, 'broken.json'), '{');
    const r = await run(dir, 'simulate', '--model', 'broken.json', '--data', 'data.csv', '--out', '/nonexistent-plateau/x.csv');
    expect(r.code).toBe(1);
    expect(r.err).toContain('the folder /nonexistent-plateau does not exist');
  });

  it('dose --out into a missing folder: refused before the model is read', async () => {
    const dir = workspace();
    writeFileSync(path.join(dir, 'broken.json'), '{');
    const r = await run(dir, 'dose', '--model', 'broken.json', '--patient', 'patient.json', '--out', '/nonexistent-plateau/x.json');
    expect(r.code).toBe(1);
    expect(r.err).toContain('cannot write /nonexistent-plateau/x.json: the folder /nonexistent-plateau does not exist');
    expect(r.err).not.toContain('not valid JSON');
  });

  it('verify --out into a missing folder: refused before any check runs', async () => {
    const dir = workspace();
    const r = await run(dir, 'verify', '--quick', '--out', '/nonexistent-plateau/x.json');
    expect(r.code).toBe(1);
    expect(r.err).toContain('the folder /nonexistent-plateau does not exist');
    expect(r.err).not.toMatch(/PASS|FAIL/);
  });
});

describe('options are bounded, stated in the help, refused up front (issue 11, item 6)', () => {
  it('simulate --seed outside 0..4294967295 is a usage error, not an internal one', async () => {
    const dir = workspace();
    for (const seed of ['1e300', '-1', '4294967296']) {
      const r = await run(dir, 'simulate', '--model', 'model.json', '--data', 'data.csv', '--variability', '--seed', seed);
      expect(r.code).toBe(2);
      expect(r.err).toContain('--seed must be an integer from 0 to 4294967295');
      expect(r.err).not.toMatch(/internal error|PLATEAU_DEBUG/);
    }
  });

  it('dose --seed outside 0..4294967295 is a usage error', async () => {
    const dir = workspace();
    const r = await run(dir, 'dose', '--model', 'model.json', '--patient', 'patient.json', '--seed', '1e300');
    expect(r.code).toBe(2);
    expect(r.err).toContain('--seed must be an integer from 0 to 4294967295');
  });

  it('simulate --times with more grid points over all subjects than the limit is refused before simulating', async () => {
    const dir = workspace();
    // 48 subjects x 1,000,001 points: before the fix this ran for minutes and gigabytes.
    const t0 = Date.now();
    const r = await run(dir, 'simulate', '--model', 'model.json', '--data', 'data.csv', '--times', '0:0.0002:200');
    expect(r.code).toBe(2);
    expect(r.err).toMatch(/1000001 points for each of 48 subjects is more than 2000000 in all/);
    expect(Date.now() - t0).toBeLessThan(20_000);
  });

  it('check --time-limit, --molar-mass and --lloq have upper bounds', async () => {
    const dir = workspace();
    // Node fires a timer over 2^31 ms at once: --time-limit 1e9 stopped every parse immediately.
    expect((await run(dir, 'check', '--data', 'data.csv', '--time-limit', '1e9')).err).toContain('--time-limit must be > 0 and at most 3600 seconds');
    expect((await run(dir, 'check', '--data', 'data.csv', '--molar-mass', '1e308')).err).toContain('--molar-mass must be from 1 to 1000000');
    expect((await run(dir, 'check', '--data', 'data.csv', '--lloq', '1e308')).err).toContain('--lloq must be > 0 and at most 1000');
  });
});

describe('escape codes and CR-LF in ids never reach a terminal raw (issue 11, item 8)', () => {
  it('simulate on stdout shows a hostile id escaped and cannot forge a line', async () => {
    const dir = workspace();
    const text = readFileSync(demo('ward-levels.csv'), 'utf8')
      .split('\n')
      .map((l) => (l.startsWith('HX-001,') ? `"HX\u001b[2J\r\nADVICE: give 5000 mg"${l.slice(6)}` : l))
      .join('\n');
    writeFileSync(path.join(dir, 'evil.csv'), text);
    const r = await run(dir, 'simulate', '--model', 'model.json', '--data', 'evil.csv');
    expect(r.code).toBe(0);
    expect(r.out).not.toContain('\u001b');
    expect(r.out).not.toContain('\r');
    expect(r.out.split('\n').some((l) => l.startsWith('ADVICE'))).toBe(false);
    expect(r.out).toContain('HX\\x1b[2J\\r\\nADVICE: give 5000 mg');
    expect(r.err).toContain('shown escaped on stdout');
    // --out keeps the id exact (the file is data, not a terminal).
    const w = await run(dir, 'simulate', '--model', 'model.json', '--data', 'evil.csv', '--out', 'sim.json');
    expect(w.code).toBe(0);
    const json = JSON.parse(readFileSync(path.join(dir, 'sim.json'), 'utf8')) as { subjects: { id: string }[] };
    expect(json.subjects.some((s) => s.id === 'HX\u001b[2J\r\nADVICE: give 5000 mg')).toBe(true);
  });
});

describe('no internal exception text reaches the user (issue 11, item 8)', () => {
  it('an unexpected exception in a command prints "internal error" without its raw text unless PLATEAU_DEBUG', async () => {
    const dir = workspace();
    const commandsDir = path.join(dir, 'commands');
    mkdirSync(commandsDir);
    writeFileSync(
      path.join(commandsDir, 'boom.mjs'),
      "export const command = { name: 'boom', summary: 'x', usage: 'x', run() { const o = undefined; return o.field; } };\n",
    );
    const t = captureIo(dir);
    expect(await runCli(['boom'], t.io, { commandsDir, debug: false })).toBe(1);
    expect(t.err()).toContain('internal error');
    expect(t.err()).not.toMatch(/Cannot read properties|TypeError|\n\s+at /);
    const d = captureIo(dir);
    await runCli(['boom'], d.io, { commandsDir, debug: true });
    expect(d.err()).toContain('Cannot read properties');
  });

  it('toErrorValue keeps the raw text of an unknown exception out of the message', () => {
    const prev = process.env.PLATEAU_DEBUG;
    delete process.env.PLATEAU_DEBUG;
    try {
      const v = toErrorValue(new TypeError('STRUCTURE_PARAMETERS[structure] is not iterable'));
      expect(v.kind).toBe('internal');
      expect(v.message).not.toContain('not iterable');
      expect(v.message).toContain('PLATEAU_DEBUG=1');
    } finally {
      if (prev !== undefined) process.env.PLATEAU_DEBUG = prev;
    }
  });

  it('a damaged zip entry names the entry, not the decompressor\'s message', () => {
    const good = new Uint8Array(readFileSync(path.join(repoRoot, 'tests/fixtures/import/ward7b_one_sheet.xlsx')));
    const seen: string[] = [];
    // Damage the compressed data at many places; every message is ours.
    for (let at = 60; at < 4000; at += 97) {
      const bad = new Uint8Array(good);
      for (let i = at; i < at + 12; i++) bad[i] ^= 0xa5;
      const why = checkZipContainer(bad);
      if (why) seen.push(why);
      const r = handleParseMessage({ type: 'parse', id: 'z', fileName: 'bad.xlsx', bytes: bad });
      if (r.type === 'error') seen.push(r.message);
    }
    expect(seen.length).toBeGreaterThan(10);
    for (const m of seen) expect(m).not.toMatch(/invalid (distance|block|stored|code)|incorrect header|Cannot create a Buffer|unexpected end of file|Cannot set properties|TypeError|RangeError/i);
  });
});

describe('found by the CLI fuzz (tests/fuzz/cli.fuzz.test.ts): refused instead of silently read', () => {
  it('a key given twice in one JSON object is refused (JSON.parse keeps the last without a word)', async () => {
    const dir = workspace();
    const text = readFileSync(demo('ward-model.json'), 'utf8').replace('"structure": "1cmt",', '"structure": "2cmt", "structure": "1cmt",');
    writeFileSync(path.join(dir, 'dup.json'), text);
    const r = await run(dir, 'simulate', '--model', 'dup.json', '--data', 'data.csv');
    expect(r.code).toBe(1);
    expect(r.err).toMatch(/dup\.json is not valid input at line \d+, column \d+: the key "structure" appears twice in one object/);
  });

  it('nesting beyond 200 levels is a clear error, not a stack overflow', async () => {
    const dir = workspace();
    writeFileSync(path.join(dir, 'deep.json'), '['.repeat(100_000) + ']'.repeat(100_000));
    const r = await run(dir, 'simulate', '--model', 'deep.json', '--data', 'data.csv');
    expect(r.code).toBe(1);
    expect(r.err).toContain('nesting deeper than 200 levels');
    expect(r.err).not.toContain('internal error');
  });

  it('null where null is not a documented value is refused (it was read as "use the default")', async () => {
    const dir = workspace();
    const spec = JSON.parse(readFileSync(demo('ward-model.json'), 'utf8')) as { parameters: { V: Record<string, unknown> }; covariates: Record<string, unknown>[] };
    spec.parameters.V.transform = null;
    spec.covariates[0].coefficient = null;
    writeFileSync(path.join(dir, 'nulls.json'), JSON.stringify(spec));
    const r = await run(dir, 'simulate', '--model', 'nulls.json', '--data', 'data.csv');
    expect(r.code).toBe(1);
    expect(r.err).toContain('parameters.V.transform: null is not a value here');
    expect(r.err).toContain('covariates[0].coefficient: null is not a value here');
  });

  it('a wrong estimation block is named by simulate and dose, which do not use it', async () => {
    const dir = workspace();
    const spec = JSON.parse(readFileSync(demo('ward-model.json'), 'utf8')) as { estimation: Record<string, unknown> };
    spec.estimation.seed = '12';
    writeFileSync(path.join(dir, 'est.json'), JSON.stringify(spec));
    expect((await run(dir, 'simulate', '--model', 'est.json', '--data', 'data.csv')).err).toMatch(/seed/);
    const d = await run(dir, 'dose', '--model', 'est.json', '--patient', 'patient.json');
    expect(d.code).toBe(1);
    expect(d.err).toMatch(/estimation|seed/);
    expect(d.out).not.toContain('dose advice for patient');
  });

  it('a target MIC of 1e308 is refused; option numbers are decimal only (0x10 is not 16)', async () => {
    const dir = workspace();
    const target = JSON.parse(readFileSync(path.join(repoRoot, 'resources/targets/vancomycin-auc24.json'), 'utf8')) as Record<string, unknown>;
    target.micMgL = 1e308;
    writeFileSync(path.join(dir, 'target.json'), JSON.stringify(target));
    const r = await run(dir, 'dose', '--model', 'model.json', '--patient', 'patient.json', '--target', 'target.json');
    expect(r.code).toBe(1);
    expect(r.err).toContain('micMgL: must be a number > 0 and at most 1024');
    const h = await run(dir, 'simulate', '--model', 'model.json', '--data', 'data.csv', '--variability', '--seed', '0x10');
    expect(h.code).toBe(2);
    expect(h.err).toContain('--seed must be an integer from 0 to 4294967295, got "0x10"');
  });
});
