#!/usr/bin/env node
/**
 * Refresh the import workbook that `plateau verify` ships in resources/validation/import from
 * tests/fixtures/import, after the fixtures were regenerated (the references themselves live
 * only in resources/validation/reference). tests/integration/verify/referenceSet.test.ts checks
 * that the copies are identical.
 * Run from the repository root: node tests/reference/sync-validation-set.mjs
 */
import { copyFileSync, readFileSync, writeFileSync } from 'node:fs';
import * as path from 'node:path';

const root = process.cwd();
const shipped = path.join(root, 'resources/validation');
const fixtures = path.join(root, 'tests/fixtures/import');
for (const f of ['ward7b_two_sheets.xlsx', 'make_fixtures.ts']) copyFileSync(path.join(fixtures, f), path.join(shipped, 'import', f));
const all = JSON.parse(readFileSync(path.join(fixtures, 'expected.json'), 'utf8'));
const fixture = all.fixtures.find((f) => f.file === 'ward7b_two_sheets.xlsx');
if (!fixture) throw new Error('tests/fixtures/import/expected.json has no entry for ward7b_two_sheets.xlsx');
writeFileSync(
  path.join(shipped, 'import/expected.json'),
  `${JSON.stringify({ generatedBy: all.generatedBy, note: `${all.note}; the entry for ward7b_two_sheets.xlsx from tests/fixtures/import/expected.json`, fixture }, null, 2)}\n`,
);
console.log('refreshed the import workbook in resources/validation');
