/**
 * One source of truth for the reference values: the tests and `plateau verify` read the same
 * files in resources/validation/reference; the shipped import workbook is byte-identical to
 * tests/fixtures/import; and a changed reference value changes the verification result (the
 * values are read from the shipped JSON, not from code).
 */
import { cpSync, mkdtempSync, readFileSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { runVerification } from '../../../main/verify/runner.js';
import { repoRoot } from './helpers.js';

const shipped = path.join(repoRoot, 'resources/validation');

function filesUnder(dir: string, rel = ''): string[] {
  const out: string[] = [];
  for (const e of readdirSync(path.join(dir, rel), { withFileTypes: true })) {
    const r = rel ? `${rel}/${e.name}` : e.name;
    if (e.isDirectory()) out.push(...filesUnder(dir, r));
    else out.push(r);
  }
  return out.sort();
}

describe('resources/validation', () => {
  it('each shipped reference lives only there: tests/reference holds no second copy', () => {
    const files = filesUnder(path.join(shipped, 'reference'));
    expect(files.length).toBeGreaterThan(10);
    const testOnly = new Set(filesUnder(path.join(repoRoot, 'tests/reference')));
    for (const f of files) expect(testOnly.has(f), f).toBe(false);
  });

  it('the import workbook and its expected problems are those of tests/fixtures/import', () => {
    const fixtures = path.join(repoRoot, 'tests/fixtures/import');
    expect(readFileSync(path.join(shipped, 'import/ward7b_two_sheets.xlsx')).equals(readFileSync(path.join(fixtures, 'ward7b_two_sheets.xlsx')))).toBe(true);
    expect(readFileSync(path.join(shipped, 'import/make_fixtures.ts')).equals(readFileSync(path.join(fixtures, 'make_fixtures.ts')))).toBe(true);
    const all = JSON.parse(readFileSync(path.join(fixtures, 'expected.json'), 'utf8'));
    const mine = JSON.parse(readFileSync(path.join(shipped, 'import/expected.json'), 'utf8'));
    expect(mine.fixture).toEqual(all.fixtures.find((f: { file: string }) => f.file === 'ward7b_two_sheets.xlsx'));
  });

  it('every check of suite.json names an existing reference file, a source and a tolerance', () => {
    const suite = JSON.parse(readFileSync(path.join(shipped, 'suite.json'), 'utf8'));
    for (const c of suite.checks) {
      expect(c.source.length, c.id).toBeGreaterThan(10);
      expect(Object.keys(c.tolerance).length, c.id).toBeGreaterThan(0);
      if (c.status === 'planned') continue;
      expect(() => readFileSync(path.join(shipped, c.reference)), `${c.id}: ${c.reference}`).not.toThrow();
    }
  });
});

describe('the reference values come from the shipped files', () => {
  const tmp = mkdtempSync(path.join(os.tmpdir(), 'plateau-refset-'));
  afterAll(() => rmSync(tmp, { recursive: true, force: true }));

  it('a closed-form concentration changed by 1e-6 relative in closed_form.json fails models.closed-form', async () => {
    cpSync(shipped, tmp, { recursive: true });
    const file = path.join(tmp, 'reference/closed-form/closed_form.json');
    const ref = JSON.parse(readFileSync(file, 'utf8'));
    ref.cases[1].concMgL[3] *= 1 + 1e-6;
    writeFileSync(file, JSON.stringify(ref));
    const report = await runVerification({ validationDir: tmp, only: ['models.closed-form', 'models.steady-state-metrics'] });
    expect(report.status).toBe('FAIL');
    expect(report.checks.map((c) => [c.id, c.status])).toEqual([
      ['models.closed-form', 'fail'],
      ['models.steady-state-metrics', 'pass'],
    ]);
    expect(report.checks[0].found).toContain('1 of 5 cases outside tolerance');
  });

  it('a damaged tolerance in suite.json fails its check with a message instead of passing', async () => {
    const suiteFile = path.join(tmp, 'suite.json');
    const suite = JSON.parse(readFileSync(path.join(shipped, 'suite.json'), 'utf8'));
    delete suite.checks.find((c: { id: string }) => c.id === 'dosing.map').tolerance.relative;
    writeFileSync(suiteFile, JSON.stringify(suite));
    const report = await runVerification({ validationDir: tmp, only: ['dosing.map'] });
    expect(report.checks[0].status).toBe('fail');
    expect(report.checks[0].error).toContain('tolerance relative is missing');
  });

  it('progress is reported per check and an abort stops the run', async () => {
    const seen: string[] = [];
    const controller = new AbortController();
    const run = runVerification({
      validationDir: shipped,
      quick: true,
      signal: controller.signal,
      onProgress: (p) => {
        seen.push(`${p.phase}:${p.id}`);
        if (p.phase === 'done' && p.index === 2) controller.abort();
      },
    });
    await expect(run).rejects.toThrow(/cancelled/);
    expect(seen).toEqual(['start:models.closed-form', 'done:models.closed-form', 'start:models.steady-state-metrics', 'done:models.steady-state-metrics']);
  });
});
