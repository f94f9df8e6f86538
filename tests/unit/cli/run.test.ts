import { mkdtempSync, writeFileSync, mkdirSync, readFileSync, readdirSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import { runCli } from '../../../main/cli/run.js';
import { parseJsonText, writeFileAtomic, readJsonFile } from '../../../main/services/files.js';
import type { CliIo } from '../../../main/cli/types.js';

function captureIo(cwd = process.cwd()): CliIo & { out: string; err: string } {
  const io = {
    out: '',
    err: '',
    cwd,
    stdout(t: string) {
      io.out += t;
    },
    stderr(t: string) {
      io.err += t;
    },
  };
  return io;
}

/** A throw-away commands folder holding plain .mjs command modules. */
function fixtureCommands(): string {
  const dir = mkdtempSync(path.join(tmpdir(), 'plateau-cmds-'));
  const runUrl = new URL('../../../engine/data/types.ts', import.meta.url).href;
  const specUrl = new URL('../../../engine/spec/modelSpec.ts', import.meta.url).href;
  writeFileSync(
    path.join(dir, 'echo.mjs'),
    `export const command = { name: 'echo', summary: 'prints its arguments', usage: 'usage: plateau echo <words>',
       async run(argv, io) { io.stdout(argv.join(' ') + '\\n'); return 0; } };`,
  );
  writeFileSync(
    path.join(dir, 'fails.mjs'),
    `import { DataError } from '${runUrl}';
     import { SpecError } from '${specUrl}';
     export const command = { name: 'fails', summary: 'throws', usage: 'usage: plateau fails <kind>',
       async run(argv) {
         if (argv[0] === 'data') throw new DataError([{ row: 4, subject: 'A1', field: 'time_h', message: 'time must be >= 0' }]);
         if (argv[0] === 'spec') throw new SpecError(['parameters.CL: missing (required by 1cmt)']);
         throw new Error('something odd');
       } };`,
  );
  writeFileSync(path.join(dir, 'broken.mjs'), `export const command = ;`);
  return dir;
}

describe('runCli', () => {
  const commandsDir = fixtureCommands();

  it('lists discovered commands with their summaries for help', async () => {
    const io = captureIo();
    expect(await runCli(['help'], io, { commandsDir })).toBe(0);
    expect(io.out).toContain('echo');
    expect(io.out).toContain('prints its arguments');
    expect(io.out).toMatch(/broken\s+\(unavailable/);
  });

  it('runs a command and returns its exit code', async () => {
    const io = captureIo();
    expect(await runCli(['echo', 'a', 'b'], io, { commandsDir })).toBe(0);
    expect(io.out).toBe('a b\n');
  });

  it('prints a command usage for --help and for help <cmd>', async () => {
    const io = captureIo();
    expect(await runCli(['echo', '--help'], io, { commandsDir })).toBe(0);
    expect(await runCli(['help', 'echo'], io, { commandsDir })).toBe(0);
    expect(io.out).toBe('usage: plateau echo <words>\nusage: plateau echo <words>\n');
  });

  it('unknown command: exit 2 with the list', async () => {
    const io = captureIo();
    expect(await runCli(['nope'], io, { commandsDir })).toBe(2);
    expect(io.err).toContain('unknown command "nope"');
    expect(io.err).toContain('echo');
  });

  it('a command that failed to load is reported only when asked for', async () => {
    const io = captureIo();
    expect(await runCli(['broken'], io, { commandsDir })).toBe(1);
    expect(io.err).toMatch(/broken command is unavailable: broken\.mjs failed to load/);
  });

  it('DataError and SpecError problems are listed, without a stack trace', async () => {
    const io = captureIo();
    expect(await runCli(['fails', 'data'], io, { commandsDir, debug: false })).toBe(1);
    expect(io.err).toContain('line 4, subject A1, field time_h: time must be >= 0');
    expect(await runCli(['fails', 'spec'], io, { commandsDir, debug: false })).toBe(1);
    expect(io.err).toContain('parameters.CL: missing (required by 1cmt)');
    expect(io.err).not.toMatch(/\bat .*\.(m?js|ts):\d+/);
  });

  it('an unexpected error says "internal error"; its raw text and stack only when debugging (issue 11)', async () => {
    const quiet = captureIo();
    expect(await runCli(['fails', 'other'], quiet, { commandsDir, debug: false })).toBe(1);
    expect(quiet.err).toContain('plateau: internal error');
    expect(quiet.err).not.toContain('something odd');
    expect(quiet.err).toContain('PLATEAU_DEBUG=1');
    const loud = captureIo();
    await runCli(['fails', 'other'], loud, { commandsDir, debug: true });
    expect(loud.err).toContain('something odd');
    expect(loud.err).toMatch(/at .*fails\.mjs/);
  });
});

describe('runCli loads only the command asked for', () => {
  it('runs a command without loading the other modules; help and a command in a file of another name load them all', async () => {
    const dir = mkdtempSync(path.join(tmpdir(), 'plateau-cmds-lazy-'));
    writeFileSync(path.join(dir, 'echo.mjs'), `export const command = { name: 'echo', summary: 'prints', usage: 'usage: plateau echo', async run(argv, io) { io.stdout(argv.join(' ') + '\\n'); return 0; } };`);
    writeFileSync(path.join(dir, 'marker.mjs'), `globalThis.__plateauMarkerLoads = (globalThis.__plateauMarkerLoads ?? 0) + 1;\nexport const command = { name: 'marker', summary: 'counts its loads', usage: 'usage: plateau marker', async run() { return 0; } };`);
    writeFileSync(path.join(dir, 'aliased.mjs'), `export const command = { name: 'renamed', summary: 'a command in a file of another name', usage: 'usage: plateau renamed', async run(argv, io) { io.stdout('renamed ran\\n'); return 0; } };`);
    const g = globalThis as { __plateauMarkerLoads?: number };
    const io = captureIo();
    expect(await runCli(['echo', 'x'], io, { commandsDir: dir })).toBe(0);
    expect(io.out).toBe('x\n');
    expect(g.__plateauMarkerLoads).toBeUndefined();
    expect(await runCli(['renamed'], io, { commandsDir: dir })).toBe(0);
    expect(io.out).toContain('renamed ran');
    expect(g.__plateauMarkerLoads).toBe(1);
    const help = captureIo();
    expect(await runCli(['help'], help, { commandsDir: dir })).toBe(0);
    expect(help.out).toMatch(/echo[\s\S]*marker[\s\S]*renamed/);
  });
});

describe('cli io helpers', () => {
  it('JSON syntax errors name the file, line and column', () => {
    expect(() => parseJsonText('{\n  "a": 1,\n  "b": }\n', 'spec.json')).toThrow(/spec\.json is not valid JSON at line 3, column 8/);
    expect(() => parseJsonText('{"a": 1', 'x.json')).toThrow(/x\.json is not valid JSON/);
    expect(parseJsonText('\uFEFF{"a": 1}', 'bom.json')).toEqual({ a: 1 });
  });

  it('a missing file is named', async () => {
    await expect(readJsonFile('/nonexistent/plateau/spec.json')).rejects.toThrow('file not found: /nonexistent/plateau/spec.json');
  });

  it('writes atomically and leaves no temp file', async () => {
    const dir = mkdtempSync(path.join(tmpdir(), 'plateau-io-'));
    const file = path.join(dir, 'out.csv');
    await writeFileAtomic(file, 'one\n');
    await writeFileAtomic(file, 'two\n');
    expect(readFileSync(file, 'utf8')).toBe('two\n');
    expect(readdirSync(dir)).toEqual(['out.csv']);
    mkdirSync(path.join(dir, 'sub'));
    await expect(writeFileAtomic(path.join(dir, 'missing', 'x.csv'), 'x')).rejects.toThrow(/does not exist/);
  });
});

describe('locating JSON errors', () => {
  it.each([
    ['{"a": 1,}', 1, 9, /trailing comma/],
    ['[1, 2', 1, 6, /ends too early/],
    ['{"a" 1}', 1, 6, /':' was expected/],
    ["{'a': 1}", 1, 2, /quoted/],
    ['{"a": "x\ny"}', 1, 9, /control character/],
    ['{"a": 1} x', 1, 10, /after the end/],
    ['{"a": tru}', 1, 7, /value was expected/],
  ])('%j', (text, line, column, reason) => {
    try {
      parseJsonText(text, 'f.json');
      expect.unreachable();
    } catch (e) {
      expect((e as Error).message).toContain(`at line ${line}, column ${column}`);
      expect((e as Error).message).toMatch(reason);
    }
  });
});
