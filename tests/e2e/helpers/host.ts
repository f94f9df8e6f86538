/**
 * Starts the real web host (`node dist/main/start.js --web`) on a fresh project folder and
 * gives its URL with the token; stops it by its process id. Needs `npm run build` first.
 */
import { execFileSync, spawn, type ChildProcess } from 'node:child_process';
import { existsSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';

export const ROOT = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..', '..', '..');

export interface RunningHost {
  url: string;
  /** The web host's process id (its engine workers are its child processes). */
  pid: number;
  projectDir: string;
  output: () => string;
  stop: () => Promise<void>;
}

export async function startHost(): Promise<RunningHost> {
  const start = path.join(ROOT, 'dist', 'main', 'start.js');
  if (!existsSync(start) || !existsSync(path.join(ROOT, 'dist', 'renderer', 'index.html'))) throw new Error('dist/ is not built: run `npm run build` first');
  const projectDir = mkdtempSync(path.join(tmpdir(), 'plateau-e2e-'));
  const child: ChildProcess = spawn(process.execPath, [start, '--web', '--no-open', '--port', '0', '--project', projectDir], { cwd: ROOT, stdio: ['ignore', 'pipe', 'pipe'] });
  let out = '';
  child.stdout?.on('data', (d) => (out += String(d)));
  child.stderr?.on('data', (d) => (out += String(d)));
  const url = await new Promise<string>((resolve, reject) => {
    const timer = setTimeout(() => reject(new Error(`the web host did not start within 20 s:\n${out}`)), 20_000);
    const check = () => {
      const m = /running at (http:\/\/\S+)/.exec(out);
      if (m) {
        clearTimeout(timer);
        resolve(m[1]);
      }
    };
    child.stdout?.on('data', check);
    child.on('exit', (code) => {
      clearTimeout(timer);
      reject(new Error(`the web host exited (${code}):\n${out}`));
    });
  });
  return {
    url,
    pid: child.pid as number,
    projectDir,
    output: () => out,
    stop: async () => {
      if (child.exitCode === null) {
        const exited = new Promise((r) => child.once('exit', r));
        child.kill('SIGTERM');
        await Promise.race([exited, new Promise((r) => setTimeout(r, 5000))]);
        if (child.exitCode === null) child.kill('SIGKILL');
      }
      rmSync(projectDir, { recursive: true, force: true });
    },
  };
}

/** Process ids of a process's children now (the web host's engine workers), by pgrep. */
export function childPids(pid: number): number[] {
  try {
    return execFileSync('pgrep', ['-P', String(pid)], { encoding: 'utf8' }).split(/\s+/).filter(Boolean).map(Number);
  } catch {
    return []; // pgrep exits 1 when there is none
  }
}
