/**
 * The spreadsheet import on a reference workbook with planted problems (invented data), read
 * through the import service, i.e. in the isolated parsing process as `plateau check` does.
 */
import * as path from 'node:path';
import { importSpreadsheetFile } from '../../services/importService.js';
import { summarise, type CheckKind } from './common.js';
import type { CheckRow } from '../types.js';

interface Planted { sheet: string; row: number; severity: 'error' | 'warning' | 'excluded'; includes: string; what: string }
interface Expected { fixture: { file: string; options: Record<string, unknown>; planted: Planted[]; summary: Record<string, number> } }

export const importWorkbook: CheckKind = {
  describe: () => 'exact: every planted problem found at its sheet and row with its severity and reason; no error on any other row; the counts of patients, doses, levels, censored levels and excluded rows equal',
  async run(spec, ctx) {
    if (typeof spec.workbook !== 'string') throw new Error(`suite.json: check ${spec.id} needs "workbook"`);
    const expected = await ctx.files.readJson<Expected>(spec.reference);
    await ctx.files.readBytes(spec.workbook); // hashed into the report's list of reference files
    const outcome = await importSpreadsheetFile(path.join(ctx.files.dir, spec.workbook), { options: expected.fixture.options, ...(ctx.signal ? { signal: ctx.signal } : {}) });
    const report = outcome.report;
    const rows: CheckRow[] = [];
    for (const [key, want] of Object.entries(expected.fixture.summary)) {
      const got = (report.summary as unknown as Record<string, number>)[key];
      rows.push({ quantity: `count: ${key}`, reference: want, found: got ?? 'missing', limit: 'equal', pass: got === want });
    }
    for (const p of expected.fixture.planted) {
      const where = `${p.sheet} row ${p.row}`;
      let found: string;
      let pass: boolean;
      if (p.severity === 'excluded') {
        const reasons = report.excluded.filter((e) => e.sheet === p.sheet && e.row === p.row).map((e) => e.reason);
        const errors = report.problems.filter((q) => q.sheet === p.sheet && q.row === p.row && q.severity === 'error');
        pass = reasons.join(' | ').toLowerCase().includes(p.includes.toLowerCase()) && errors.length === 0;
        found = reasons.length ? `excluded: ${reasons.join(' | ')}` : 'not excluded';
      } else {
        const msgs = report.problems.filter((q) => q.sheet === p.sheet && q.row === p.row && q.severity === p.severity).map((q) => q.message);
        const excluded = report.excluded.some((e) => e.sheet === p.sheet && e.row === p.row);
        pass = msgs.join(' | ').includes(p.includes) && (p.severity !== 'error' || excluded);
        found = msgs.length ? `${p.severity}: ${msgs.join(' | ')}${p.severity === 'error' && !excluded ? ' (row NOT excluded)' : ''}` : `no ${p.severity} on that row`;
      }
      rows.push({ quantity: `planted: ${p.what} (${where})`, reference: `${p.severity}, mentions "${p.includes}"`, found, limit: 'found', pass });
    }
    const plantedRows = new Set(expected.fixture.planted.filter((p) => p.severity === 'error').map((p) => `${p.sheet}:${p.row}`));
    const stray = report.problems.filter((q) => q.severity === 'error' && q.row > 0 && !plantedRows.has(`${q.sheet}:${q.row}`));
    rows.push({ quantity: 'errors on rows without a planted problem', reference: 0, found: stray.length ? `${stray.length}: ${stray.map((q) => `${q.sheet} row ${q.row}: ${q.message}`).join(' | ')}` : 0, limit: 'none', pass: stray.length === 0 });
    return { rows, found: summarise(rows, 'expectations') };
  },
};
