/** The parse worker: real child process, time and size limits, protocol checked both ways. */
import { mkdtempSync, writeFileSync, readFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { importSpreadsheetFile, parseInWorker, ImportError } from '../../../main/services/importService.js';
import type { SpawnWorker, WorkerHandle } from '../../../main/services/workerSpawner.js';
import { handleParseMessage } from '../../../main/worker/parseWorker.js';
import { validateParseRequest } from '../../../main/services/importProtocol.js';
import { checkZipContainer } from '../../../main/worker/limits.js';
import { ensureWorkerBuilt, repoRoot, workerPath } from './workerBuild.js';

const fixture = (f: string) => path.join(repoRoot, 'tests/fixtures/import', f);
const tmp = mkdtempSync(path.join(tmpdir(), 'plateau-import-'));

beforeAll(() => ensureWorkerBuilt(), 200_000);

/** A fake worker that answers with whatever `reply` returns (or never, or dies). */
function fakeSpawner(behaviour: (req: { id: string }, h: { send: (m: unknown) => void; exit: (code: number | null, sig: string | null) => void }) => void): { spawn: SpawnWorker; killed: () => number } {
  let kills = 0;
  const spawn: SpawnWorker = () => {
    let onMsg: (m: unknown) => void = () => {};
    let onExit: (c: number | null, s: string | null) => void = () => {};
    const h: WorkerHandle = {
      postMessage: (m) => setTimeout(() => behaviour(m as { id: string }, { send: (x) => onMsg(x), exit: (c, s) => onExit(c, s) }), 1),
      onMessage: (l) => void (onMsg = l),
      onExit: (l) => void (onExit = l),
      kill: () => void kills++,
      stderrTail: () => '',
    };
    return h;
  };
  return { spawn, killed: () => kills };
}

describe('import through the worker process', () => {
  it('imports a fixture and re-validates the dataset on this side', async () => {
    const out = await importSpreadsheetFile(fixture('ward7b_two_sheets.xlsx'), { options: { dateOrder: 'dayFirst' }, workerPath });
    expect(out.report.summary).toMatchObject({ patients: 8, doses: 14, levels: 10, censored: 2 });
    expect(Object.getPrototypeOf(out.dataset!.subjects[0].covariates)).toBeNull();
    expect(Object.isFrozen(out.dataset!.subjects)).toBe(true);
  });

  it('stops a parse that runs past the time limit and says so', async () => {
    await expect(importSpreadsheetFile(fixture('ward7b_two_sheets.xlsx'), { timeLimitMs: 1, workerPath })).rejects.toMatchObject({ kind: 'timeout', message: expect.stringMatching(/took longer than/) });
  });

  it('refuses files above the size limit before parsing', async () => {
    const big = path.join(tmp, 'big.csv');
    writeFileSync(big, 'x'.repeat(2048));
    await expect(importSpreadsheetFile(big, { maxBytes: 1024, workerPath })).rejects.toMatchObject({ kind: 'too-large' });
    await expect(importSpreadsheetFile(path.join(tmp, 'missing.xlsx'), { workerPath })).rejects.toMatchObject({ kind: 'file', message: expect.stringMatching(/not found/) });
  });

  it('reports damaged files and bad templates as clear errors', async () => {
    const bytes = readFileSync(fixture('ward7b_one_sheet.xlsx'));
    const cut = path.join(tmp, 'cut.xlsx');
    writeFileSync(cut, bytes.subarray(0, 3000));
    await expect(importSpreadsheetFile(cut, { workerPath })).rejects.toMatchObject({ kind: 'workbook', message: expect.stringMatching(/cut\.xlsx/) });
    const err = await importSpreadsheetFile(fixture('ward7b_one_sheet.xlsx'), { mapping: { format: 'nope' }, workerPath }).catch((e: unknown) => e);
    expect(err).toBeInstanceOf(ImportError);
    expect((err as ImportError).kind).toBe('template');
    expect((err as ImportError).problems.join('\n')).toContain('$.format');
  });

  it('kills a worker that never answers, and one that sends garbage', async () => {
    const silent = fakeSpawner(() => {});
    await expect(parseInWorker({ fileName: 'x.xlsx', bytes: new Uint8Array(1) }, { spawn: silent.spawn, timeLimitMs: 50 })).rejects.toMatchObject({ kind: 'timeout' });
    expect(silent.killed()).toBeGreaterThan(0);
    const garbage = fakeSpawner((req, h) => h.send({ type: 'result', id: req.id, analysis: { preview: 'no' } }));
    await expect(parseInWorker({ fileName: 'x.xlsx', bytes: new Uint8Array(1) }, { spawn: garbage.spawn })).rejects.toMatchObject({ kind: 'worker', message: expect.stringMatching(/misbehaved/) });
    const wrongId = fakeSpawner((_req, h) => h.send({ type: 'error', id: 'other', kind: 'workbook', message: 'x' }));
    await expect(parseInWorker({ fileName: 'x.xlsx', bytes: new Uint8Array(1) }, { spawn: wrongId.spawn })).rejects.toMatchObject({ kind: 'worker' });
    const dies = fakeSpawner((_req, h) => h.exit(null, 'SIGSEGV'));
    await expect(parseInWorker({ fileName: 'x.xlsx', bytes: new Uint8Array(1) }, { spawn: dies.spawn })).rejects.toMatchObject({ kind: 'worker', message: expect.stringMatching(/SIGSEGV/) });
    const ac = new AbortController();
    const p = parseInWorker({ fileName: 'x.xlsx', bytes: new Uint8Array(1) }, { spawn: fakeSpawner(() => {}).spawn, signal: ac.signal });
    ac.abort();
    await expect(p).rejects.toMatchObject({ kind: 'aborted' });
  });

  it('the worker rejects malformed requests', () => {
    expect(validateParseRequest(null).ok).toBe(false);
    expect(validateParseRequest({ type: 'parse', id: 'a', fileName: 'f', bytes: 'text' }).ok).toBe(false);
    expect(handleParseMessage({ type: 'evil', id: 'a' })).toMatchObject({ type: 'error', kind: 'request' });
    expect(handleParseMessage({ type: 'parse', id: 'a', fileName: 'f', bytes: new Uint8Array([1, 2, 0, 0, 0, 0, 0, 3]) })).toMatchObject({ type: 'error', kind: 'workbook' });
  });

  it('refuses damaged zip containers before the spreadsheet parser sees them', () => {
    const good = new Uint8Array(readFileSync(fixture('ward7b_one_sheet.xlsx')));
    expect(checkZipContainer(good)).toBeUndefined();
    expect(checkZipContainer(good.subarray(0, good.length - 10))).toMatch(/central directory/);
    // Flip bytes in the middle of the first entry's compressed data.
    const bad = new Uint8Array(good);
    for (let i = 200; i < 220; i++) bad[i] ^= 0x5a;
    expect(checkZipContainer(bad)).toMatch(/does not unpack|checksum|unpacks to/);
    expect(handleParseMessage({ type: 'parse', id: 'z', fileName: 'bad.xlsx', bytes: bad })).toMatchObject({ type: 'error', kind: 'workbook', message: expect.stringMatching(/bad\.xlsx cannot be read/) });
    // A declared size above the limit (zip bomb guard).
    expect(checkZipContainer(good, 10)).toMatch(/above the limit/);
  });
});
