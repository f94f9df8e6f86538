import { mkdtempSync, readFileSync, writeFileSync, existsSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import { parseCanonicalCsv, parseCanonicalCsvDetailed } from '../../../engine/data/canonicalCsv.js';
import { runCli } from '../../../main/cli/run.js';
import type { CliIo } from '../../../main/cli/types.js';

function captureIo(cwd: string): CliIo & { out: string; err: string } {
  const io = { out: '', err: '', cwd, stdout: (t: string) => void (io.out += t), stderr: (t: string) => void (io.err += t) };
  return io;
}

// Invented example data and spec (CLI behaviour tests only).
function workspace(): string {
  const dir = mkdtempSync(path.join(tmpdir(), 'plateau-sim-'));
  writeFileSync(
    path.join(dir, 'spec.json'),
    JSON.stringify({
      structure: '1cmt',
      parameters: { CL: { typical: 4, transform: 'log', bsv: 0.3 }, V: { typical: 50, transform: 'log', bsv: 0.2 }, ka: { typical: 1.5 } },
      covariates: [{ parameter: 'CL', covariate: 'crcl', relation: 'power', reference: 80, coefficient: 0.75 }],
      correlations: [['CL', 'V']],
      correlationValues: { 'CL,V': 0.4 },
      residual: { model: 'proportional', b: 0.1 },
    }),
  );
  writeFileSync(
    path.join(dir, 'data.csv'),
    [
      'subject,time_h,event,amount_mg,duration_h,conc_mg_L,censored,lloq_mg_L,route,crcl',
      'A,0,dose,1000,1,,,,iv,80',
      'A,2,level,,,15,0,0.5,,80',
      'A,11.5,level,,,6,0,0.5,,80',
      'B,0,dose,500,,,,,iv,40',
      'B,6,level,,,7,,,,40',
      'C,0,dose,250,,,,,oral,80',
      'C,3,level,,,2,,,,80',
    ].join('\n') + '\n',
  );
  return dir;
}

describe('plateau simulate (in-process)', () => {
  it('writes the canonical CSV with predicted levels, checked against closed forms', async () => {
    const dir = workspace();
    const io = captureIo(dir);
    expect(await runCli(['simulate', '--model', 'spec.json', '--data', 'data.csv', '--out', 'pred.csv'], io)).toBe(0);
    expect(io.out).toMatch(/simulated 3 subject\(s\) with 1cmt: 4 level\(s\) -> pred\.csv/);
    const ds = parseCanonicalCsv(readFileSync(path.join(dir, 'pred.csv'), 'utf8'));
    const [a, b, c] = ds.subjects;
    const k = 4 / 50;
    // One-compartment zero-order infusion, post-infusion (standard PK texts, e.g. Gibaldi & Perrier, Pharmacokinetics, 2nd ed., 1982; from memory):
    // C(t) = (k0 / CL) (1 - e^{-k T}) e^{-k (t - T)}, k0 = 1000 mg/h, T = 1 h.
    expect(a.observations[0].valueMgL).toBeCloseTo((1000 / 4) * (1 - Math.exp(-k)) * Math.exp(-k * 1), 10);
    expect(a.observations[1].valueMgL).toBeCloseTo((1000 / 4) * (1 - Math.exp(-k)) * Math.exp(-k * 10.5), 10);
    // IV bolus C = D/V e^{-CL'/V t} with CL' = 4 (40/80)^0.75 (power covariate relation).
    const clB = 4 * Math.pow(0.5, 0.75);
    expect(b.observations[0].valueMgL).toBeCloseTo((500 / 50) * Math.exp((-clB / 50) * 6), 10);
    // Oral (Bateman function, same texts): C = F D ka / (V (ka - k)) (e^{-k t} - e^{-ka t}).
    expect(c.observations[0].valueMgL).toBeCloseTo(((250 * 1.5) / (50 * (1.5 - k))) * (Math.exp(-k * 3) - Math.exp(-1.5 * 3)), 10);
    expect(a.observations.every((o) => !o.censored)).toBe(true);
    expect(a.covariates.crcl).toBe(80);
  });

  it('adds grid rows and writes JSON', async () => {
    const dir = workspace();
    const io = captureIo(dir);
    expect(await runCli(['simulate', '--model', 'spec.json', '--data', 'data.csv', '--times', '0:0.5:24', '--out', 'pred.csv'], io)).toBe(0);
    const parsed = parseCanonicalCsvDetailed(readFileSync(path.join(dir, 'pred.csv'), 'utf8'));
    expect(parsed.skippedGridRows).toBe(3 * 49);
    expect(await runCli(['simulate', '--model', 'spec.json', '--data', 'data.csv', '--times=0:6:12', '--out', 'pred.json'], io)).toBe(0);
    const json = JSON.parse(readFileSync(path.join(dir, 'pred.json'), 'utf8'));
    expect(json.subjects.map((s: { id: string }) => s.id)).toEqual(['A', 'B', 'C']);
    expect(json.subjects[0].grid.map((g: { timeH: number }) => g.timeH)).toEqual([0, 6, 12]);
    expect(json.subjects[0].parameters).toEqual({ CL: 4, V: 50 });
    expect(json.subjects[2].parameters).toEqual({ CL: 4, V: 50, ka: 1.5, tlag: 0, F: 1 });
    expect(json.subjects[0].levels[0].observedMgL).toBe(15);
  });

  it('uses per-subject parameter columns', async () => {
    const dir = workspace();
    writeFileSync(path.join(dir, 'own.csv'), 'subject,time_h,event,amount_mg,conc_mg_L,crcl,CL\nA,0,dose,100,,80,2\nA,5,level,,1,80,2\n');
    const io = captureIo(dir);
    expect(await runCli(['simulate', '--model', 'spec.json', '--data', 'own.csv'], io)).toBe(0);
    const ds = parseCanonicalCsv(io.out);
    expect(ds.subjects[0].observations[0].valueMgL).toBeCloseTo((100 / 50) * Math.exp((-2 / 50) * 5), 12);
  });

  it('with --variability, the same seed gives the same file and another seed differs', async () => {
    const dir = workspace();
    const run = async (seed: string) => {
      const io = captureIo(dir);
      expect(await runCli(['simulate', '--model', 'spec.json', '--data', 'data.csv', '--variability', '--seed', seed], io)).toBe(0);
      return io.out;
    };
    const a = await run('11');
    expect(await run('11')).toBe(a);
    expect(await run('12')).not.toBe(a);
    const typical = captureIo(dir);
    await runCli(['simulate', '--model', 'spec.json', '--data', 'data.csv'], typical);
    expect(a).not.toBe(typical.out);
    const seeded = captureIo(dir);
    expect(await runCli(['simulate', '--model', 'spec.json', '--data', 'data.csv', '--seed', '5'], seeded)).toBe(0);
    expect(seeded.out).toBe(typical.out);
    expect(seeded.err).toContain('no effect without --variability');
  });

  it('bad input: clear errors naming subject and field, exit 1 or 2', async () => {
    const dir = workspace();
    writeFileSync(path.join(dir, 'bad.csv'), 'subject,time_h,event,amount_mg,conc_mg_L,crcl\nA,-1,dose,100,,80\nB,0,dose,-5,,80\nC,NaN,level,,3,80\n');
    let io = captureIo(dir);
    expect(await runCli(['simulate', '--model', 'spec.json', '--data', 'bad.csv'], io)).toBe(1);
    expect(io.err).toContain('line 2, subject A, field time_h');
    expect(io.err).toContain('line 3, subject B, field amount_mg');
    expect(io.err).toContain('line 4, subject C, field time_h');
    expect(io.err).toContain('bad.csv');

    writeFileSync(path.join(dir, 'nocov.csv'), 'subject,time_h,event,amount_mg,conc_mg_L\nA,0,dose,100,\nA,1,level,,3\n');
    io = captureIo(dir);
    expect(await runCli(['simulate', '--model', 'spec.json', '--data', 'nocov.csv'], io)).toBe(1);
    expect(io.err).toContain('subject A, field crcl');

    writeFileSync(path.join(dir, 'noka.json'), JSON.stringify({ structure: '1cmt', parameters: { CL: { typical: 4 }, V: { typical: 50 } }, residual: { model: 'additive', a: 1 } }));
    writeFileSync(path.join(dir, 'oral.csv'), 'subject,time_h,event,amount_mg,route,conc_mg_L\nP,0,dose,100,oral,\nP,1,level,,,3\n');
    io = captureIo(dir);
    expect(await runCli(['simulate', '--model', 'noka.json', '--data', 'oral.csv'], io)).toBe(1);
    expect(io.err).toContain('subject P, field ka');

    writeFileSync(path.join(dir, 'unknown.json'), JSON.stringify({ structure: '5cmt' }));
    io = captureIo(dir);
    expect(await runCli(['simulate', '--model', 'unknown.json', '--data', 'data.csv'], io)).toBe(1);
    expect(io.err).toContain('unknown model id "5cmt"');

    writeFileSync(path.join(dir, 'missing.json'), JSON.stringify({ structure: '2cmt', parameters: { CL: { typical: 4 } }, residual: { model: 'additive', a: 1 } }));
    io = captureIo(dir);
    expect(await runCli(['simulate', '--model', 'missing.json', '--data', 'data.csv'], io)).toBe(1);
    expect(io.err).toContain('parameters.V1: missing');

    io = captureIo(dir);
    expect(await runCli(['simulate', '--model', 'spec.json', '--data', 'nothere.csv'], io)).toBe(1);
    expect(io.err).toContain('data file not found');
    expect(io.err).not.toContain('PLATEAU_DEBUG');

    io = captureIo(dir);
    expect(await runCli(['simulate', '--model', 'spec.json', '--data', 'data.csv', '--times', '0:-1:5'], io)).toBe(2);
    expect(io.err).toContain('step must be > 0');
    io = captureIo(dir);
    expect(await runCli(['simulate', '--data', 'data.csv'], io)).toBe(2);
    expect(io.err).toContain('--model is required');
    io = captureIo(dir);
    expect(await runCli(['simulate', '--model', 'spec.json', '--data', 'data.csv', '--out', 'x.txt'], io)).toBe(2);

    io = captureIo(dir);
    expect(await runCli(['simulate', '--model', 'spec.json', '--data', 'book.xlsx'], io)).toBe(1);
    expect(io.err).toMatch(/book\.xlsx/);
    expect(existsSync(path.join(dir, 'x.txt'))).toBe(false);
  });
});
