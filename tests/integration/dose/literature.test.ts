/**
 * The literature model library (resources/models/literature): every file parses, carries a full
 * citation, its population and covariate ranges, and ships unverified; advice from an
 * unverified model is blocked, from a verified one allowed; editing a value after verification
 * blocks again.
 */
import { copyFileSync, mkdtempSync, readdirSync, readFileSync, writeFileSync } from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import { runCli } from '../../../main/cli/run.js';
import { parseModelSpec } from '../../../engine/spec/modelSpec.js';
import { UNVERIFIED_TEXT } from '../../../engine/spec/literature.js';
import { captureIo } from '../../helpers/captureIo.js';

const ROOT = path.resolve(__dirname, '../../..');
const LIB = path.join(ROOT, 'resources/models/literature');
const FILES = readdirSync(LIB).filter((f) => f.endsWith('.json'));

describe('literature model library', () => {
  it('has vancomycin and aminoglycoside models, each cited, with its population and ranges, unverified and marked from memory', () => {
    const drugs = new Set<string>();
    for (const f of FILES) {
      const raw = JSON.parse(readFileSync(path.join(LIB, f), 'utf8'));
      const spec = parseModelSpec(raw);
      const lit = spec.literature!;
      drugs.add(lit.drug.split(' ')[0]);
      expect(lit.citation).toMatch(/\d{4};\d+/); // journal year;volume
      expect(lit.population.length).toBeGreaterThan(20);
      expect(Object.keys(spec.covariateRanges ?? {}).length).toBeGreaterThan(0);
      expect(lit.status).toBe(UNVERIFIED_TEXT);
      expect(lit.verified).toBeUndefined();
      expect(lit.valuesFrom).toBe('memory');
      expect(lit.notes.join(' ')).toContain('(from memory)');
    }
    expect(drugs.has('vancomycin')).toBe(true);
    expect([...drugs].some((d) => d === 'gentamicin' || d === 'tobramycin' || d === 'amikacin')).toBe(true);
  });

  it('advice from an unverified model is blocked; after plateau models --verify it is allowed; an edit voids it', async () => {
    const dir = mkdtempSync(path.join(os.tmpdir(), 'plateau-lit-'));
    const model = path.join(dir, 'thomson.json');
    copyFileSync(path.join(LIB, 'vancomycin-thomson-2009.json'), model);
    writeFileSync(
      path.join(dir, 'patient.json'),
      JSON.stringify({ id: 'lit-1', covariates: { weight_kg: 75, age_y: 60, sex: 'M', scr_mg_dL: 1.0 }, doses: [0, 12, 24].map((t) => ({ time_h: t, amount_mg: 1000, duration_h: 1 })), levels: [{ time_h: 35.5, conc_mg_L: 14 }] }),
    );
    const dose = async () => {
      const t = captureIo(dir);
      const code = await runCli(['dose', '--model', 'thomson.json', '--patient', 'patient.json', '--target', 'vancomycin-auc24', '--json', '--draws', '500'], t.io);
      return { code, a: JSON.parse(t.out()) };
    };
    const before = await dose();
    expect(before.code).toBe(1);
    expect(before.a.status).toBe('blocked');
    expect(before.a.warnings.find((w: { code: string }) => w.code === 'literature-unverified').message).toContain(UNVERIFIED_TEXT);

    const t = captureIo(dir);
    expect(await runCli(['models', '--verify', 'thomson.json'], t.io)).toBe(2); // --by is required
    const v = captureIo(dir);
    expect(await runCli(['models', '--verify', 'thomson.json', '--by', 'A. Pharmacist (test)', '--date', '2026-12-04'], v.io)).toBe(0);
    const raw = JSON.parse(readFileSync(model, 'utf8'));
    expect(raw.literature.verified).toMatchObject({ by: 'A. Pharmacist (test)', date: '2026-12-04' });
    expect(raw.literature.valuesFrom).toBe('publication');

    const after = await dose();
    expect(after.a.warnings.some((w: { code: string }) => w.code === 'literature-unverified')).toBe(false);
    expect(after.a.warnings.find((w: { code: string }) => w.code === 'literature-verified').message).toContain('A. Pharmacist (test) on 2026-12-04');
    expect(after.a.model.source).toContain('Thomson AH');

    raw.parameters.CL.typical = 2;
    writeFileSync(model, JSON.stringify(raw));
    const edited = await dose();
    expect(edited.a.status).toBe('blocked');
    expect(edited.a.warnings.find((w: { code: string }) => w.code === 'literature-unverified').message).toContain('changed after A. Pharmacist (test) verified them');
  });

  it('plateau models --library lists every file as unverified', async () => {
    const t = captureIo(ROOT);
    expect(await runCli(['models', '--library'], t.io)).toBe(0);
    expect(t.out().split('UNVERIFIED (advice blocked)').length - 1).toBe(FILES.length);
  });
});
