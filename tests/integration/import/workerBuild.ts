/** Make sure the compiled parse worker exists and is newer than its sources (npm test builds first). */
import { execSync } from 'node:child_process';
import { existsSync, readdirSync, statSync } from 'node:fs';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';

export const repoRoot = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '../../..');
export const workerPath = path.join(repoRoot, 'dist/main/worker/parseWorker.js');

function newestSource(): number {
  let t = 0;
  for (const dir of ['engine/import', 'main/worker', 'main/services', 'engine/data']) {
    for (const f of readdirSync(path.join(repoRoot, dir))) if (f.endsWith('.ts')) t = Math.max(t, statSync(path.join(repoRoot, dir, f)).mtimeMs);
  }
  return t;
}

export function ensureWorkerBuilt(): void {
  if (existsSync(workerPath) && statSync(workerPath).mtimeMs >= newestSource()) return;
  try {
    execSync('npx tsc -p tsconfig.json', { cwd: repoRoot, stdio: 'ignore', timeout: 180_000 });
  } catch {
    // tsc exits non-zero on type errors elsewhere in the tree but still emits.
  }
  if (!existsSync(workerPath)) throw new Error(`the parse worker was not built at ${workerPath}: run npm run build`);
}
