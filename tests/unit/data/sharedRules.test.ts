/**
 * Issue 11, finding 4: `check` and `fit` disagreed. One set of rules (engine/data/rules.ts) for
 * the canonical CSV reader (fit, simulate, and check on a canonical CSV) and the spreadsheet
 * import (check, fit, simulate on .xlsx/.xls/.ods and export CSVs). Reproduced from
 * resources/demo/ward-levels.csv (invented demo data): every row twice, and censored flags
 * "maybe", "2", "-1".
 */
import { describe, expect, it } from 'vitest';
import { parseCanonicalCsv } from '../../../engine/data/canonicalCsv.js';
import { DataError } from '../../../engine/data/types.js';
import { analyseWorkbook } from '../../../engine/import/analyse.js';
import * as XLSX from 'xlsx';
import { demoText } from '../../fuzz/corpus.js';

const enc = (t: string) => new TextEncoder().encode(t);
const asXlsx = (t: string) => new Uint8Array(XLSX.write(XLSX.read(t, { type: 'string', raw: true }), { type: 'array', bookType: 'xlsx' }) as ArrayBuffer);

/** Errors from each path: the canonical reader (fit), check on the CSV, the spreadsheet import of the same rows. */
function errorsEverywhere(text: string): { fit: string[]; checkCsv: string[]; spreadsheet: string[] } {
  let fit: string[] = [];
  try {
    parseCanonicalCsv(text);
  } catch (e) {
    if (!(e instanceof DataError)) throw e;
    fit = e.problems.map((p) => p.message);
  }
  const errs = (bytes: Uint8Array) => analyseWorkbook(bytes).report.problems.filter((p) => p.severity === 'error').map((p) => p.message);
  return { fit, checkCsv: errs(enc(text)), spreadsheet: errs(asXlsx(text)) };
}

describe('one validation for every command (resources/demo/ward-levels.csv)', () => {
  const text = demoText();

  it('the demo is valid everywhere', () => {
    expect(errorsEverywhere(text)).toEqual({ fit: [], checkCsv: [], spreadsheet: [] });
  });

  it('a dataset with every row twice is refused everywhere with the same message (it doubled every dose in fit)', () => {
    const lines = text.trimEnd().split('\n');
    const doubled = [lines[0], ...lines.slice(1).flatMap((l) => [l, l])].join('\n') + '\n';
    const e = errorsEverywhere(doubled);
    const rows = lines.length - 1;
    for (const list of [e.fit, e.checkCsv, e.spreadsheet]) {
      expect(list.length).toBe(rows);
      expect(list.every((m) => /\(same patient, time and (dose|level)\): remove one of them/.test(m))).toBe(true);
    }
  });

  for (const flag of ['maybe', '2', '-1']) {
    it(`a censored flag "${flag}" is an error everywhere (check read it as not censored)`, () => {
      const lines = text.split('\n');
      const k = lines.findIndex((l) => /,level,/.test(l) && /,0,2,/.test(l));
      lines[k] = lines[k].replace(',0,2,', `,${flag},2,`);
      const e = errorsEverywhere(lines.join('\n'));
      for (const list of [e.fit, e.checkCsv, e.spreadsheet]) {
        expect(list.length).toBe(1);
        expect(list[0]).toContain(`the censored flag "${flag}" is not 1, 0, true, false, yes, no or empty`);
      }
    });
  }

  it('a level before the first dose is an error everywhere', () => {
    const lines = text.split('\n');
    // The second patient's first level moved before its first dose (time_h 0 -> the level at 0, the doses from 1).
    const id = lines[1].split(',')[0];
    const other = lines.filter((l, i) => i > 0 && l !== '' && !l.startsWith(`${id},`))[0].split(',')[0];
    const rows = lines.filter((l) => l.startsWith(`${other},`));
    const lvl = rows.find((l) => l.includes(',level,'))!;
    const moved = lvl.split(',');
    moved[1] = '0';
    const shifted = lines.map((l) => {
      if (l === lvl) return moved.join(',');
      if (l.startsWith(`${other},`) && l.includes(',dose,')) {
        const f = l.split(',');
        f[1] = String(Number(f[1]) + 0.5);
        return f.join(',');
      }
      return l;
    });
    const e = errorsEverywhere(shifted.join('\n'));
    for (const list of [e.fit, e.checkCsv, e.spreadsheet]) {
      expect(list.length).toBe(1);
      expect(list[0]).toMatch(/the level is before the first dose of patient/);
    }
  });
});
