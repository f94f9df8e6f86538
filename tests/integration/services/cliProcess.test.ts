/**
 * Process faults of the command line and the workers (issue 11, finding 7), with real
 * processes: Ctrl-C during the post-fit steps stops `plateau fit` (exit 130, --out not written,
 * no temp file left); a crash of the command process is reported by the supervisor; a closed
 * stdout does not lose --out; a worker dies with its parent.
 */
import { spawn } from 'node:child_process';
import { existsSync, mkdtempSync, readdirSync, readFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { ensureBuilt, repoRoot } from './build.js';

beforeAll(() => ensureBuilt(), 300_000);
const bin = path.join(repoRoot, 'dist/main/cli/plateau.js');
const demo = (f: string) => path.join(repoRoot, 'resources/demo', f);
const alive = (pid: number) => {
  try {
    process.kill(pid, 0);
    return true;
  } catch {
    return false;
  }
};

function exitOf(child: ReturnType<typeof spawn>): Promise<{ code: number | null; signal: string | null }> {
  return new Promise((resolve) => child.on('exit', (code, signal) => resolve({ code, signal })));
}

describe('command line and worker processes', () => {
  // Five times: the command gets the terminal's Ctrl-C as the supervisor does and may close the
  // channel before the supervisor's own abort message goes out; that send once crashed the
  // supervisor (EPIPE, exit 1) in about a third of runs.
  it.each([1, 2, 3, 4, 5])('Ctrl-C during the post-fit steps stops fit: exit 130, no --out, no temp file (run %i)', async () => {
    const dir = mkdtempSync(path.join(tmpdir(), 'plateau-sigint-'));
    // detached: its own process group, so the signal goes to the group as a terminal's Ctrl-C does.
    const child = spawn(process.execPath, [bin, 'fit', '--data', demo('ward-levels.csv'), '--model', demo('ward-model.json'), '--progress', '--out', 'fit.json'], { cwd: dir, detached: true, stdio: ['ignore', 'pipe', 'pipe'] });
    let err = '';
    const exit = exitOf(child);
    await new Promise<void>((resolve) => child.stderr!.on('data', (d) => ((err += d), /\[seed \d+ post-fit/.test(err) && resolve())));
    // A seed's post-fit steps are running now (in its job thread).
    const t0 = performance.now();
    process.kill(-child.pid!, 'SIGINT');
    const { code } = await exit;
    const ms = performance.now() - t0;
    expect(code).toBe(130);
    expect(ms).toBeLessThan(5000);
    expect(err).toMatch(/stopping/);
    expect(existsSync(path.join(dir, 'fit.json'))).toBe(false);
    expect(readdirSync(dir).filter((f) => f.endsWith('.tmp'))).toEqual([]);
  }, 120_000);

  it('a fit whose command process crashes (killed from outside) is reported by the supervisor: exit 1, a message, no --out, no temp file', async () => {
    // The seeds run in job threads of the command process: a crash of that process (here SIGKILL,
    // as the system's out-of-memory killer sends) must still be reported, not end in silence.
    const dir = mkdtempSync(path.join(tmpdir(), 'plateau-crash-'));
    const child = spawn(process.execPath, [bin, 'fit', '--data', demo('ward-levels.csv'), '--model', demo('ward-model.json'), '--progress', '--out', 'fit.json'], { cwd: dir, stdio: ['ignore', 'pipe', 'pipe'] });
    let err = '';
    const exit = exitOf(child);
    await new Promise<void>((resolve) => child.stderr!.on('data', (d) => ((err += d), /\[seed \d+ search/.test(err) && resolve())));
    // Linux: the supervisor's one child is the command process.
    const commandPid = Number(readFileSync(`/proc/${child.pid}/task/${child.pid}/children`, 'utf8').trim().split(/\s+/)[0]);
    expect(commandPid).toBeGreaterThan(0);
    process.kill(commandPid, 'SIGKILL');
    const { code } = await exit;
    expect(code).toBe(1);
    expect(err).toMatch(/plateau: internal error: the command process ended unexpectedly \(signal SIGKILL\)/);
    expect(existsSync(path.join(dir, 'fit.json'))).toBe(false);
    expect(readdirSync(dir).filter((f) => f.endsWith('.tmp'))).toEqual([]);
  }, 120_000);

  it('a closed stdout (| head -1) does not crash fit or lose --out', async () => {
    const dir = mkdtempSync(path.join(tmpdir(), 'plateau-epipe-'));
    const child = spawn(process.execPath, [bin, 'fit', '--data', demo('ward-levels.csv'), '--model', demo('ward-model.json'), '--out', 'fit.json'], { cwd: dir, stdio: ['ignore', 'pipe', 'pipe'] });
    let err = '';
    child.stderr!.on('data', (d) => (err += d));
    child.stdout!.once('data', () => child.stdout!.destroy());
    const { code } = await exitOf(child);
    expect(err).not.toMatch(/EPIPE|Unhandled|at .*\.js/);
    expect(code).toBe(0);
    expect(existsSync(path.join(dir, 'fit.json'))).toBe(true);
  }, 120_000);

  it('engine and parse workers end when their parent is killed', async () => {
    const child = spawn(process.execPath, [path.join(repoRoot, 'tests/integration/services/workerParent.mjs'), path.join(repoRoot, 'dist')], { stdio: ['ignore', 'pipe', 'inherit'] });
    const pids = await new Promise<{ engine: number; parse: number }>((resolve) => {
      let buf = '';
      child.stdout!.on('data', (d) => {
        buf += d;
        if (buf.includes('\n')) resolve(JSON.parse(buf.split('\n')[0]));
      });
    });
    expect(alive(pids.engine) && alive(pids.parse)).toBe(true);
    child.kill('SIGKILL');
    const t0 = Date.now();
    while ((alive(pids.engine) || alive(pids.parse)) && Date.now() - t0 < 5000) await new Promise((r) => setTimeout(r, 50));
    expect(alive(pids.engine)).toBe(false);
    expect(alive(pids.parse)).toBe(false);
  }, 60_000);
});
