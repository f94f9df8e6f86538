#!/usr/bin/env node
/**
 * Refresh the copies that `plateau verify` ships in resources/validation from their sources here
 * (tests/reference/** and tests/fixtures/import), after a reference or fixture was regenerated.
 * Only files already present in resources/validation/reference are refreshed (add a new one by
 * copying it once). tests/integration/verify/referenceSet.test.ts checks that they are identical.
 * Run from the repository root: node tests/reference/sync-validation-set.mjs
 */
import { copyFileSync, readFileSync, readdirSync, writeFileSync } from 'node:fs';
import * as path from 'node:path';

const root = process.cwd();
const shipped = path.join(root, 'resources/validation');
const walk = (dir, rel = '') =>
  readdirSync(path.join(dir, rel), { withFileTypes: true }).flatMap((e) => (e.isDirectory() ? walk(dir, path.join(rel, e.name)) : [path.join(rel, e.name)]));

let n = 0;
for (const rel of walk(path.join(shipped, 'reference'))) {
  copyFileSync(path.join(root, 'tests/reference', rel), path.join(shipped, 'reference', rel));
  n++;
}
const fixtures = path.join(root, 'tests/fixtures/import');
for (const f of ['ward7b_two_sheets.xlsx', 'make_fixtures.ts']) copyFileSync(path.join(fixtures, f), path.join(shipped, 'import', f));
const all = JSON.parse(readFileSync(path.join(fixtures, 'expected.json'), 'utf8'));
const fixture = all.fixtures.find((f) => f.file === 'ward7b_two_sheets.xlsx');
if (!fixture) throw new Error('tests/fixtures/import/expected.json has no entry for ward7b_two_sheets.xlsx');
writeFileSync(
  path.join(shipped, 'import/expected.json'),
  `${JSON.stringify({ generatedBy: all.generatedBy, note: `${all.note}; the entry for ward7b_two_sheets.xlsx from tests/fixtures/import/expected.json`, fixture }, null, 2)}\n`,
);
console.log(`refreshed ${n} reference files and the import workbook in resources/validation`);
