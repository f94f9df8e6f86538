#!/usr/bin/env node
/**
 * `npm ci` / `npm install` run this (the "prepare" script): compile main, engine and worker to
 * dist/, then build the renderer when the project has its build (the "build:renderer" script),
 * so that after `npm ci` the app starts at once with `npm start`. On an install without dev
 * tools (no TypeScript) it says so and leaves dist/ as it is.
 */
import { spawnSync } from 'node:child_process';
import { readFileSync } from 'node:fs';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';
import { buildMain } from './run-built.mjs';

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..');
const built = buildMain();
if (!built.ok) {
  if (built.reason.includes('not installed')) {
    process.stderr.write(`prepare: ${built.reason}; skipping the build\n`);
    process.exit(0);
  }
  process.stderr.write(`prepare: ${built.reason}\n`);
  process.exit(1);
}
const scripts = JSON.parse(readFileSync(path.join(root, 'package.json'), 'utf8')).scripts ?? {};
if (typeof scripts['build:renderer'] === 'string') {
  const npm = process.env.npm_execpath;
  const run = npm
    ? spawnSync(process.execPath, [npm, 'run', '--silent', 'build:renderer'], { cwd: root, stdio: 'inherit' })
    : spawnSync(process.platform === 'win32' ? 'npm.cmd' : 'npm', ['run', '--silent', 'build:renderer'], { cwd: root, stdio: 'inherit', shell: process.platform === 'win32' });
  if (run.status !== 0) {
    process.stderr.write(`prepare: the renderer build failed (exit ${run.status})\n`);
    process.exit(1);
  }
} else {
  process.stderr.write('prepare: no renderer build in this checkout (no "build:renderer" script); the web host will say so\n');
}
