/**
 * Kill-and-check (issue 11, item 7): every command that writes a file is SIGKILLed (its whole
 * process group: the supervisor and the command) at seeded random moments around its write.
 * After each kill every output is absent, the previous complete file or the new complete file,
 * never broken; after a later successful run no hidden `.name.pid.rand.tmp` file remains
 * (writeFileAtomic removes those of processes that are gone). Demo data are invented.
 */
import { spawn } from 'node:child_process';
import { existsSync, mkdtempSync, readFileSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { removeStaleTemps } from '../../../main/services/files.js';
import { ensureBuilt, repoRoot } from '../services/build.js';

beforeAll(() => ensureBuilt(), 300_000);

const bin = path.join(repoRoot, 'dist/main/cli/plateau.js');

/** mulberry32: a small seeded generator, so the kill moments repeat run to run. */
function rng(seed: number): () => number {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

function workspace(): string {
  const dir = mkdtempSync(path.join(tmpdir(), 'plateau-kill-'));
  for (const f of ['ward-model.json', 'ward-levels.csv', 'patient.json']) writeFileSync(path.join(dir, f), readFileSync(path.join(repoRoot, 'resources/demo', f)));
  return dir;
}

/** Run the CLI in its own process group; kill the group after `killAfterMs` (undefined: let it finish). */
function runCli(dir: string, args: string[], killAfterMs?: number): Promise<{ code: number | null; ms: number }> {
  return new Promise((resolve) => {
    const t0 = Date.now();
    const child = spawn(process.execPath, [bin, ...args], { cwd: dir, detached: true, stdio: 'ignore', env: { ...process.env, PLATEAU_DEBUG: '' } });
    let timer: NodeJS.Timeout | undefined;
    if (killAfterMs !== undefined)
      timer = setTimeout(() => {
        try {
          process.kill(-child.pid!, 'SIGKILL');
        } catch {
          /* already ended */
        }
      }, killAfterMs);
    child.on('exit', (code) => {
      if (timer) clearTimeout(timer);
      // Kill the group in any case, so no command of a killed supervisor lives on.
      try {
        process.kill(-child.pid!, 'SIGKILL');
      } catch {
        /* none left */
      }
      resolve({ code, ms: Date.now() - t0 });
    });
  });
}

/** Split CSV text into rows of fields (RFC 4180 quotes). */
function csvRows(text: string): string[][] {
  const rows: string[][] = [];
  let row: string[] = [];
  let field = '';
  let quoted = false;
  for (let i = 0; i < text.length; i++) {
    const c = text[i];
    if (quoted) {
      if (c === '"' && text[i + 1] === '"') (field += '"'), i++;
      else if (c === '"') quoted = false;
      else field += c;
    } else if (c === '"') quoted = true;
    else if (c === ',') row.push(field), (field = '');
    else if (c === '\n') row.push(field.replace(/\r$/, '')), rows.push(row), (row = []), (field = '');
    else field += c;
  }
  if (field !== '' || row.length) rows.push([...row, field]);
  return rows;
}

/** Why a file is not complete, or undefined when it is (JSON parses; CSV ends its last line, every row as wide as the header). */
function brokenReason(file: string): string | undefined {
  const text = readFileSync(file, 'utf8');
  if (file.endsWith('.json')) {
    try {
      JSON.parse(text);
      return undefined;
    } catch (e) {
      return `not JSON: ${(e as Error).message}`;
    }
  }
  if (!text.endsWith('\n')) return 'the last line has no newline';
  const rows = csvRows(text);
  if (rows.length < 2) return 'no data rows';
  const bad = rows.findIndex((r) => r.length !== rows[0].length);
  return bad >= 0 ? `row ${bad + 1} has ${rows[bad].length} fields, the header ${rows[0].length}` : undefined;
}

function tempsIn(dir: string): string[] {
  return readdirSync(dir).filter((n) => n.endsWith('.tmp'));
}

interface Case {
  name: string;
  args: string[];
  outputs: string[];
  kills: number;
  /** Exit codes of a complete run (dose: 1 when the advice is blocked, still written; verify: 1 when a check fails). */
  okCodes: number[];
}

const cases: Case[] = [
  { name: 'check --report --export-dataset --save-mapping', args: ['check', '--data', 'ward-levels.csv', '--report', 'report.json', '--export-dataset', 'dataset.csv', '--save-mapping', 'mapping.json'], outputs: ['report.json', 'dataset.csv', 'mapping.json'], kills: 14, okCodes: [0] },
  { name: 'simulate --out', args: ['simulate', '--model', 'ward-model.json', '--data', 'ward-levels.csv', '--times', '0:0.5:72', '--out', 'sim.csv'], outputs: ['sim.csv'], kills: 14, okCodes: [0] },
  { name: 'dose --out', args: ['dose', '--model', 'ward-model.json', '--patient', 'patient.json', '--target', 'vancomycin-auc24', '--out', 'advice.json'], outputs: ['advice.json'], kills: 14, okCodes: [0, 1] },
  { name: 'fit --out', args: ['fit', '--model', 'ward-model.json', '--data', 'ward-levels.csv', '--out', 'fit.json'], outputs: ['fit.json'], kills: 12, okCodes: [0] },
  { name: 'verify --out (json)', args: ['verify', '--quick', '--out', 'verify.json'], outputs: ['verify.json'], kills: 5, okCodes: [0, 1] },
];

describe('SIGKILL at random moments never leaves a broken file, and stale temp files are removed', () => {
  for (const [k, c] of cases.entries()) {
    it(c.name, async () => {
      const dir = workspace();
      const random = rng(1101 + k);
      // A first complete run measures the command's duration and gives the "previous" file.
      const first = await runCli(dir, c.args);
      expect(c.okCodes).toContain(first.code);
      for (const o of c.outputs) expect(brokenReason(path.join(dir, o))).toBeUndefined();
      let killed = 0;
      let tempsSeen = 0;
      for (let i = 0; i < c.kills; i++) {
        // Half the kills with no file there before, half over the previous complete file.
        if (i === Math.floor(c.kills / 2)) await runCli(dir, c.args);
        else if (i < c.kills / 2) for (const o of c.outputs) rmSync(path.join(dir, o), { force: true });
        // Moments from 30 % to 110 % of a full run: most kills land in the late phase that writes.
        const r = await runCli(dir, c.args, Math.round(first.ms * (0.3 + 0.8 * random())));
        if (r.code === null) killed++;
        tempsSeen += tempsIn(dir).length;
        for (const o of c.outputs) {
          const file = path.join(dir, o);
          if (!existsSync(file)) continue;
          // Complete: the previous file or a new complete one (verify's report carries times, so it differs).
          expect(brokenReason(file), `${o} after kill ${i + 1} at a random moment`).toBeUndefined();
          if (i >= c.kills / 2 && o !== 'verify.json') expect(readFileSync(file, 'utf8').length).toBeGreaterThan(0);
        }
      }
      expect(killed).toBeGreaterThan(0);
      // A later successful run removes every temp file the kills left.
      console.log(`${c.name}: ${killed} of ${c.kills} runs killed, ${tempsSeen} temp file(s) seen after a kill, ${tempsIn(dir).length} now`);
      const last = await runCli(dir, c.args);
      expect(c.okCodes).toContain(last.code);
      expect(tempsIn(dir)).toEqual([]);
      for (const o of c.outputs) expect(brokenReason(path.join(dir, o))).toBeUndefined();
    }, 120_000);
  }

  it('a writer SIGKILLed in the middle of a large write leaves a temp file, which the next command removes', async () => {
    const dir = workspace();
    const target = path.join(dir, 'sim.csv');
    writeFileSync(target, 'subject,time_h\nA,0\n');
    // A process that writes 200 MB through the one atomic writer, killed while it writes.
    const files = path.join(repoRoot, 'dist/main/services/files.js');
    const script = `import('${files.replace(/\\/g, '/')}').then((m) => m.writeFileAtomic(${JSON.stringify(target)}, Buffer.alloc(200 * 1024 * 1024, 65)))`;
    const child = spawn(process.execPath, ['-e', script], { stdio: 'ignore' });
    const deadline = Date.now() + 20_000;
    while (tempsIn(dir).length === 0 && Date.now() < deadline) await new Promise((r) => setTimeout(r, 5));
    child.kill('SIGKILL');
    await new Promise((r) => child.on('exit', r));
    expect(tempsIn(dir).length).toBe(1);
    // The target is still the previous complete file.
    expect(readFileSync(target, 'utf8')).toBe('subject,time_h\nA,0\n');
    const r = await runCli(dir, ['simulate', '--model', 'ward-model.json', '--data', 'ward-levels.csv', '--out', 'sim.csv']);
    expect(r.code).toBe(0);
    expect(tempsIn(dir)).toEqual([]);
    expect(brokenReason(target)).toBeUndefined();
  }, 60_000);

  it('a temp file of a process that is gone is removed before the next write; a live one is kept', async () => {
    const dir = workspace();
    // The pid of a process that has ended.
    const gone = await new Promise<number>((resolve) => {
      const child = spawn(process.execPath, ['-e', '0'], { stdio: 'ignore' });
      child.on('exit', () => resolve(child.pid!));
    });
    const target = path.join(dir, 'sim.csv');
    const stale = path.join(dir, `.sim.csv.${gone}.0badc0de.tmp`);
    const live = path.join(dir, `.sim.csv.${process.ppid}.0dd5a11e.tmp`);
    const other = path.join(dir, `.other.csv.${gone}.0badc0de.tmp`);
    for (const f of [stale, live, other]) writeFileSync(f, 'half a fi');
    const r = await runCli(dir, ['simulate', '--model', 'ward-model.json', '--data', 'ward-levels.csv', '--out', 'sim.csv']);
    expect(r.code).toBe(0);
    expect(existsSync(stale)).toBe(false);
    expect(existsSync(live)).toBe(true);
    // Only temp files of the same target are touched.
    expect(existsSync(other)).toBe(true);
    expect(brokenReason(target)).toBeUndefined();
    expect(await removeStaleTemps(path.join(dir, 'other.csv'))).toEqual([other]);
  }, 60_000);

  it.runIf(process.platform === 'linux')('a temp file of a zombie (killed, never reaped by its parent) counts as stale', async () => {
    const dir = workspace();
    // sh starts a background subshell, prints its pid, then becomes `sleep`, which never reaps
    // it; the subshell ends only once sh has become sleep (so sh cannot reap it first), as a
    // zombie that signal 0 still reaches. ($$ in a subshell is the shell's own pid.)
    const parent = spawn('/bin/sh', ['-c', '(while [ "$(cat /proc/$$/comm)" != sleep ]; do sleep 0.05; done) & echo $!; exec sleep 10'], { stdio: ['ignore', 'pipe', 'ignore'] });
    try {
      const zombiePid = await new Promise<number>((resolve) => parent.stdout!.once('data', (d: Buffer) => resolve(Number(String(d).trim()))));
      const deadline = Date.now() + 8000;
      const state = () => {
        try {
          const stat = readFileSync(`/proc/${zombiePid}/stat`, 'utf8');
          return stat[stat.lastIndexOf(')') + 2];
        } catch {
          return '';
        }
      };
      while (state() !== 'Z' && Date.now() < deadline) await new Promise((r) => setTimeout(r, 10));
      expect(state()).toBe('Z');
      const temp = path.join(dir, `.fit.json.${zombiePid}.0badc0de.tmp`);
      writeFileSync(temp, 'half a fi');
      expect(await removeStaleTemps(path.join(dir, 'fit.json'))).toEqual([temp]);
    } finally {
      parent.kill('SIGKILL');
    }
  }, 30_000);
});
