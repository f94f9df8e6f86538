/** The repository root, and dist/ compiled when a source is newer (build/run-built.mjs). */
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';
// @ts-expect-error plain JavaScript build helper
import { buildMain, distIsStale } from '../../../build/run-built.mjs';

export const repoRoot = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '../../..');

export function ensureBuilt(): void {
  if (!distIsStale()) return;
  const built = buildMain() as { ok: boolean; reason?: string };
  if (!built.ok) throw new Error(`could not build dist/: ${built.reason}`);
}
