/** `plateau check` end to end (in-process CLI, real worker process). */
import { mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { runCli } from '../../../main/cli/run.js';
import { loadSpreadsheetDataset } from '../../../main/services/spreadsheetDataset.js';
import { DataError } from '../../../engine/data/types.js';
import { ensureWorkerBuilt, repoRoot } from './workerBuild.js';

const fixtures = path.join(repoRoot, 'tests/fixtures/import');
const tmp = mkdtempSync(path.join(tmpdir(), 'plateau-check-'));

async function plateau(...argv: string[]) {
  let stdout = '';
  let stderr = '';
  const code = await runCli(argv, { stdout: (t) => void (stdout += t), stderr: (t) => void (stderr += t), cwd: fixtures });
  return { code, stdout, stderr };
}

beforeAll(() => ensureWorkerBuilt(), 200_000);

describe('plateau check', () => {
  it('prints the suggested mapping, summary and problems, and writes report.json and the mapping', async () => {
    const report = path.join(tmp, 'report.json');
    const mapping = path.join(tmp, 'mapping.json');
    const r = await plateau('check', '--data', 'ward7b_two_sheets.xlsx', '--day-first', '--report', report, '--save-mapping', mapping);
    expect(r.code).toBe(1); // errors were found (those rows are excluded)
    expect(r.stdout).toContain('Suggested mapping');
    expect(r.stdout).toContain('"Administered"               -> dateTime');
    expect(r.stdout).toContain('Summary: 8 patients, 14 doses, 10 levels (2 censored), 17 rows excluded');
    expect(r.stdout).toContain('sheet "MAR export", row 12, column D (Dose): the dose amount is negative');
    const json = JSON.parse(readFileSync(report, 'utf8'));
    expect(Object.keys(json)).toEqual(['mapping', 'summary', 'problems', 'excluded', 'notes']);
    expect(json.summary).toEqual({ patients: 8, doses: 14, levels: 10, censored: 2, excludedRows: 17 });
    expect(json.problems[0]).toEqual({ sheet: 'MAR export', row: 12, column: 'D (Dose)', value: '-1000', severity: 'error', message: 'the dose amount is negative' });
    expect(json.mapping.format).toBe('plateau-import-mapping');

    const again = await plateau('check', '--data', 'ward7b_two_sheets.xlsx', '--mapping', mapping, '--report', path.join(tmp, 'report.xlsx'), '--export-dataset', path.join(tmp, 'dataset.csv'));
    expect(again.stdout).toContain('Mapping:\n');
    expect(again.stdout).toContain('Summary: 8 patients, 14 doses, 10 levels (2 censored), 17 rows excluded');
    expect(readFileSync(path.join(tmp, 'dataset.csv'), 'utf8').split('\r\n')[0]).toMatch(/^subject,time_h,event,amount_mg/);
  });

  it('asks for the date order when the file cannot decide it', async () => {
    const r = await plateau('check', '--data', 'ambiguous_dates.csv');
    expect(r.code).toBe(1);
    expect(r.stdout).toContain('choose --day-first or --month-first');
    const ok = await plateau('check', '--data', 'ambiguous_dates.csv', '--day-first', '--save-mapping', path.join(tmp, 'amb.json'));
    expect(ok.stdout).toContain('Problems: 0 error(s)');
    expect(ok.code).toBe(0);
  });

  it('gives usage errors and clear file errors', async () => {
    expect((await plateau('check')).code).toBe(2);
    expect((await plateau('check', '--data', 'x.csv', '--day-first', '--month-first')).code).toBe(2);
    const missing = await plateau('check', '--data', 'nope.xlsx');
    expect(missing.code).toBe(1);
    expect(missing.stderr).toContain('file not found');
    writeFileSync(path.join(tmp, 'bad.json'), '{');
    const bad = await plateau('check', '--data', 'ambiguous_dates.csv', '--mapping', path.join(tmp, 'bad.json'));
    expect(bad.code).toBe(1);
    expect(bad.stderr).toContain('not valid JSON');
  });
});

describe('spreadsheet branch of the dataset loader', () => {
  it('loads a clean export with its mapping, and refuses one with errors, listing them', async () => {
    await plateau('check', '--data', 'ambiguous_dates.csv', '--day-first', '--save-mapping', path.join(tmp, 'amb2.json'));
    const ds = await loadSpreadsheetDataset(path.join(fixtures, 'ambiguous_dates.csv'), path.join(tmp, 'amb2.json'));
    expect(ds.subjects.map((s) => s.id)).toEqual(['A-1']);
    const err = await loadSpreadsheetDataset(path.join(fixtures, 'ward7b_one_sheet.xlsx'), undefined).catch((e: unknown) => e);
    expect(err).toBeInstanceOf(DataError);
    expect((err as DataError).message).toContain('neither a dose nor a level');
  });
});

describe('plateau check on the demo dataset', () => {
  it('maps all four covariates of resources/demo/ward-levels.csv under their canonical names', async () => {
    const r = await plateau('check', '--data', path.join(repoRoot, 'resources/demo/ward-levels.csv'));
    expect(r.code).toBe(0);
    expect(r.stdout).toMatch(/"weight_kg"\s+-> weight \[kg\]/);
    expect(r.stdout).toMatch(/"crcl_mL_min"\s+-> covariate "crcl_mL_min"/);
    expect(r.stdout).toMatch(/"age_y"\s+-> age/);
    expect(r.stdout).toMatch(/"sex"\s+-> sex/);
    expect(r.stdout).toContain('0 rows excluded');
  });
});

describe('check, fit and simulate agree (issue 11, finding 4; resources/demo/ward-levels.csv)', () => {
  const demo = readFileSync(path.join(repoRoot, 'resources/demo/ward-levels.csv'), 'utf8');

  it('every row twice: check, fit and simulate all refuse it, naming the duplicates', async () => {
    const lines = demo.trimEnd().split('\n');
    const file = path.join(tmp, 'doubled.csv');
    writeFileSync(file, [lines[0], ...lines.slice(1).flatMap((l) => [l, l])].join('\n') + '\n');
    const check = await plateau('check', '--data', file);
    expect(check.code).toBe(1);
    expect(check.stdout).toMatch(/duplicate of line 2 \(same patient, time and dose\)/);
    const model = path.join(repoRoot, 'resources/demo/ward-model.json');
    for (const cmd of ['fit', 'simulate']) {
      const r = await plateau(cmd, '--data', file, '--model', model, '--out', path.join(tmp, `${cmd}-doubled.json`));
      expect(r.code, cmd).toBe(1);
      expect(r.stderr, cmd).toMatch(/duplicate of line 2 \(same patient, time and dose\)/);
    }
  }, 120_000);

  it('a patient id with CR-LF and escape codes cannot forge a line of output', async () => {
    const file = path.join(tmp, 'forged.csv');
    // The level comes before the dose, so the error message names the patient.
    writeFileSync(file, 'Patient,Time (h),Dose (mg),Level (mg/L)\n"P1\r\nADVICE: give 5000 mg\u001b[2J",1,1000,\n"P1\r\nADVICE: give 5000 mg\u001b[2J",0,,3\n');
    const r = await plateau('check', '--data', file, '--default-route', 'bolus');
    expect(r.stdout).toMatch(/before the first dose of patient P1.*ADVICE: give 5000 mg/); // shown, escaped, on the error's own line
    expect(r.stdout + r.stderr).not.toMatch(/^ADVICE/m);
    expect(r.stdout + r.stderr).not.toContain('\u001b');
  });
});
