/** Running the compiled `plateau verify` as a child process, as an installation runs it. */
import { execSync, spawnSync } from 'node:child_process';
import { existsSync, readdirSync, statSync } from 'node:fs';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';

export const repoRoot = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '../../..');
export const distCli = path.join(repoRoot, 'dist/main/cli/plateau.js');

function newest(dir: string): number {
  let t = 0;
  for (const e of readdirSync(dir, { withFileTypes: true })) {
    const p = path.join(dir, e.name);
    if (e.isDirectory()) t = Math.max(t, newest(p));
    else if (e.name.endsWith('.ts')) t = Math.max(t, statSync(p).mtimeMs);
  }
  return t;
}

/** Build dist/ when it is missing or older than the sources the verify run uses (npm test builds first). */
export function ensureBuilt(): void {
  const marker = path.join(repoRoot, 'dist/main/verify/runner.js');
  const sources = Math.max(newest(path.join(repoRoot, 'engine')), newest(path.join(repoRoot, 'main')));
  if (existsSync(marker) && statSync(marker).mtimeMs >= sources) return;
  try {
    execSync('npx tsc -p tsconfig.json', { cwd: repoRoot, stdio: 'ignore', timeout: 300_000 });
  } catch {
    // tsc exits non-zero on type errors elsewhere but still emits.
  }
  if (!existsSync(marker)) throw new Error(`dist/ was not built (${marker} missing): run npm run build`);
}

export interface CliRun {
  code: number | null;
  stdout: string;
  stderr: string;
}

export function runVerifyCli(cli: string, args: string[], cwd: string, env: NodeJS.ProcessEnv = process.env): CliRun {
  const r = spawnSync(process.execPath, [cli, 'verify', ...args], { cwd, env, encoding: 'utf8', timeout: 240_000 });
  return { code: r.status, stdout: r.stdout, stderr: r.stderr };
}
