#!/usr/bin/env node
/**
 * `npm run pack -- [electron-builder options]`: builds the installers of build/electron-builder.json
 * for this platform (or the targets given, e.g. `--linux AppImage deb`, `--win nsis portable`).
 * Compiles first when dist/ is stale; never publishes. Needs the Electron runtime and the
 * packaging tools in the electron-builder cache (README, "Packaging").
 */
import { spawnSync } from 'node:child_process';
import { existsSync } from 'node:fs';
import { createRequire } from 'node:module';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';
import { buildMain, distIsStale } from './run-built.mjs';

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..');
if (distIsStale()) {
  const built = buildMain();
  if (!built.ok) {
    process.stderr.write(`pack: ${built.reason}\n`);
    process.exit(1);
  }
}
if (!existsSync(path.join(root, 'dist', 'renderer', 'index.html'))) {
  process.stderr.write('pack: dist/renderer is not built; run `npm run prepare` first (the app would show no user interface)\n');
  process.exit(1);
}
const cli = createRequire(import.meta.url).resolve('electron-builder/cli.js');
const args = [cli, '--config', path.join('build', 'electron-builder.json'), '--publish', 'never', ...process.argv.slice(2)];
const run = spawnSync(process.execPath, args, { cwd: root, stdio: 'inherit' });
process.exit(run.status ?? 1);
