/**
 * One loader limit for every command (issue 11, finding 2): devices, FIFOs and folders are
 * refused at once, sizes are checked before reading, for JSON, canonical CSV and spreadsheets.
 */
import { execFileSync } from 'node:child_process';
import { appendFileSync, mkdtempSync, truncateSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import { loadDataset } from '../../../main/services/datasetLoader.js';
import { MAX_INPUT_BYTES, readRegularFile } from '../../../main/services/fileGuard.js';
import { loadModelFile } from '../../../main/services/doseService.js';
import { readJsonFile } from '../../../main/services/files.js';
import { fitTheophInto } from '../../helpers/theophFit.js';
import { importSpreadsheetFile } from '../../../main/services/importService.js';

const dir = mkdtempSync(path.join(tmpdir(), 'plateau-guard-'));
const fifo = path.join(dir, 'pipe.csv');
execFileSync('mkfifo', [fifo]);
const fifoXlsx = path.join(dir, 'pipe.xlsx');
execFileSync('mkfifo', [fifoXlsx]);
const huge = path.join(dir, 'huge.csv');
writeFileSync(huge, '');
truncateSync(huge, MAX_INPUT_BYTES + 1); // sparse: the size is there without the bytes

/** Time a call that must be refused (a thunk, so no promise is left without a handler). */
async function quick<T>(call: () => Promise<T>): Promise<{ ms: number; error: Error }> {
  const t0 = performance.now();
  try {
    await call();
  } catch (e) {
    return { ms: performance.now() - t0, error: e as Error };
  }
  throw new Error('expected a refusal');
}

describe('file guard', () => {
  it('refuses /dev/zero, a FIFO and a folder at once, for every kind of input', async () => {
    for (const [p, re] of [
      [() => readRegularFile('/dev/zero'), /a device, not a regular file/],
      [() => readJsonFile('/dev/zero'), /a device/],
      [() => loadDataset('/dev/zero'), /a device/],
      [() => loadDataset(fifo), /a pipe \(FIFO\)/],
      [() => readJsonFile(fifo), /a pipe/],
      [() => importSpreadsheetFile(fifoXlsx), /a pipe/],
      [() => loadDataset(dir), /a folder/],
      [() => readJsonFile(dir), /a folder/],
    ] as const) {
      const r = await quick(p);
      expect(r.error.message).toMatch(re);
      expect(r.ms).toBeLessThan(2000);
    }
  });

  it('checks the size before reading', async () => {
    const r = await quick(() => loadDataset(huge));
    expect(r.error.message).toMatch(/above the limit of 50 MB/);
    expect((await quick(() => importSpreadsheetFile(huge, { mapping: {} }))).error.message).toMatch(/above the limit/);
    expect((await quick(() => readRegularFile(huge, { maxBytes: 10 }))).error.message).toMatch(/above the limit/);
  });

  it('reads back a fit record above the 50 MB JSON limit (a fit of about 12,000 sparse-data patients writes about 50 MB)', async () => {
    const fitDir = mkdtempSync(path.join(tmpdir(), 'plateau-bigfit-'));
    const record = await fitTheophInto(fitDir);
    // A real fit.json grown past the JSON limit by trailing whitespace (valid JSON).
    const file = path.join(fitDir, 'fit.json');
    appendFileSync(file, ' '.repeat(MAX_INPUT_BYTES + 1024));
    const model = await loadModelFile(file);
    expect(model.provenance).toMatchObject({ kind: 'site fit', dataHash: record.dataHash });
    expect(record.format).toBe('plateau-fit');
    // A document a user writes keeps the JSON limit.
    expect((await quick(() => readJsonFile(file))).error.message).toMatch(/above the limit of 50 MB/);
  }, 120_000);

  it('reads an ordinary file whole', async () => {
    const f = path.join(dir, 'ok.json');
    writeFileSync(f, '{"a":1}');
    expect(await readJsonFile(f)).toEqual({ a: 1 });
  });
});
