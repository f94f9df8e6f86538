/**
 * Undamaged originals for the damage tests and the fuzz suite, built from committed files: the
 * demo export (resources/demo/ward-levels.csv, invented) written by SheetJS as .xls (BIFF8),
 * .ods and .xlsx, and the import fixtures (tests/fixtures/import). Deterministic: the same bytes
 * on every run.
 */
import { readFileSync } from 'node:fs';
import * as path from 'node:path';
import * as XLSX from 'xlsx';
import { repoRoot } from '../integration/import/workerBuild.js';

export const DEMO_CSV = path.join(repoRoot, 'resources/demo/ward-levels.csv');

/** The demo export, or its first `lines` lines (header included) for faster fuzzing. */
export function demoText(lines?: number): string {
  const text = readFileSync(DEMO_CSV, 'utf8');
  if (lines === undefined) return text;
  return text.split('\n').slice(0, lines).join('\n') + '\n';
}

/** The demo export as a workbook of one sheet with every cell as text, as a lab system writes it. */
export function demoWorkbookBytes(bookType: 'biff8' | 'ods' | 'xlsx', lines?: number): Uint8Array {
  const wb = XLSX.read(demoText(lines), { type: 'string', raw: true });
  const props = { CreatedDate: new Date(Date.UTC(2026, 0, 1)) };
  wb.Props = props as XLSX.FullProperties;
  return new Uint8Array(XLSX.write(wb, { type: 'array', bookType, compression: bookType !== 'biff8' }) as ArrayBuffer);
}

export function fixtureBytes(name: string): Uint8Array {
  return new Uint8Array(readFileSync(path.join(repoRoot, 'tests/fixtures/import', name)));
}
