/** Make sure the compiled engine worker exists and is newer than its sources (npm test builds first). */
import { execSync } from 'node:child_process';
import { existsSync, readdirSync, statSync } from 'node:fs';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';

export const repoRoot = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '../../..');
export const engineWorkerPath = path.join(repoRoot, 'dist/main/worker/engineWorker.js');
export const resourcesDir = path.join(repoRoot, 'resources');

function newestSource(): number {
  let t = 0;
  for (const dir of ['main/worker', 'main/services', 'main/protocol', 'main/cli', 'engine/saem', 'engine/posthoc']) {
    for (const f of readdirSync(path.join(repoRoot, dir))) if (f.endsWith('.ts')) t = Math.max(t, statSync(path.join(repoRoot, dir, f)).mtimeMs);
  }
  return t;
}

export function ensureBuilt(): void {
  if (existsSync(engineWorkerPath) && statSync(engineWorkerPath).mtimeMs >= newestSource()) return;
  try {
    execSync('npx tsc -p tsconfig.json', { cwd: repoRoot, stdio: 'ignore', timeout: 300_000 });
  } catch {
    // tsc exits non-zero on type errors elsewhere in the tree but still emits.
  }
  if (!existsSync(engineWorkerPath)) throw new Error(`the engine worker was not built at ${engineWorkerPath}: run npm run build`);
}
