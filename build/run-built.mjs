#!/usr/bin/env node
/**
 * Runs a compiled entry of dist/ (`node build/run-built.mjs dist/main/cli/plateau.js args...`),
 * compiling first only when dist/ is missing or older than a source file. The check is a stat of
 * each source file (a few milliseconds), so `npm run plateau` and `npm start` no longer spend
 * seconds in tsc on every call. Build output goes to stderr, so JSON on stdout stays clean.
 */
import { spawnSync } from 'node:child_process';
import { existsSync, readdirSync, statSync, utimesSync } from 'node:fs';
import { createRequire } from 'node:module';
import * as path from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..');
const buildInfo = path.join(root, 'dist', '.tsbuildinfo');
// The folders tsconfig.json compiles (its "include"), and the files that change its output.
const SOURCE_DIRS = ['engine', 'main', path.join('tests', 'bench')];
const CONFIG_FILES = ['tsconfig.json', 'package.json'];

function newestSourceMs() {
  let newest = 0;
  for (const f of CONFIG_FILES) newest = Math.max(newest, statSync(path.join(root, f)).mtimeMs);
  const stack = SOURCE_DIRS.map((d) => path.join(root, d)).filter((d) => existsSync(d));
  while (stack.length > 0) {
    const dir = stack.pop();
    for (const entry of readdirSync(dir, { withFileTypes: true })) {
      const full = path.join(dir, entry.name);
      if (entry.isDirectory()) stack.push(full);
      else if (entry.name.endsWith('.ts') || entry.name.endsWith('.cts') || entry.name.endsWith('.mts')) {
        if (!entry.name.endsWith('.test.ts')) newest = Math.max(newest, statSync(full).mtimeMs);
      }
    }
  }
  return newest;
}

/** True when dist/ is missing or a source is newer than the last build. */
export function distIsStale() {
  if (!existsSync(buildInfo)) return true;
  return newestSourceMs() > statSync(buildInfo).mtimeMs;
}

/** tsc -p tsconfig.json, its output on stderr; marks the build time on success. */
export function buildMain() {
  let tsc;
  try {
    tsc = createRequire(import.meta.url).resolve('typescript/bin/tsc');
  } catch {
    return { ok: false, reason: 'TypeScript is not installed (run npm ci)' };
  }
  const run = spawnSync(process.execPath, [tsc, '-p', path.join(root, 'tsconfig.json')], { cwd: root, stdio: ['ignore', 2, 2] });
  if (run.status !== 0) return { ok: false, reason: `the TypeScript build failed (exit ${run.status})` };
  // tsc leaves .tsbuildinfo untouched when nothing changed; touch it so the check above passes.
  const now = new Date();
  if (existsSync(buildInfo)) utimesSync(buildInfo, now, now);
  return { ok: true };
}

if (process.argv[1] && path.resolve(process.argv[1]) === fileURLToPath(import.meta.url)) {
  const [entry, ...args] = process.argv.slice(2);
  if (!entry) {
    process.stderr.write('usage: node build/run-built.mjs <dist/.../entry.js> [arguments]\n');
    process.exit(2);
  }
  const entryPath = path.resolve(root, entry);
  if (distIsStale()) {
    process.stderr.write('plateau: compiling (sources changed since the last build)...\n');
    const built = buildMain();
    if (!built.ok && !existsSync(entryPath)) {
      process.stderr.write(`plateau: cannot run ${entry}: ${built.reason}\n`);
      process.exit(1);
    }
    if (!built.ok) {
      process.stderr.write(`plateau: ${built.reason}; fix it and run again\n`);
      process.exit(1);
    }
  }
  // Run the entry in this process, as if started directly (`node dist/.../entry.js args`).
  process.argv = [process.argv[0], entryPath, ...args];
  await import(pathToFileURL(entryPath).href);
}
