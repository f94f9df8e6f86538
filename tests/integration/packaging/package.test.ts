/**
 * Packaging: the electron-builder configuration validates offline (electron-builder's own
 * schema), and `electron-builder --linux dir` with a stub Electron folder made here produces an
 * app.asar holding the compiled main, worker, engine, renderer and resources, and nothing of the
 * tests, sources, source maps, build paths or dev tools. Installer targets (AppImage, deb, NSIS,
 * portable, dmg) need tool downloads this machine cannot make: only their configuration is
 * checked. About 15 s.
 */
import { spawnSync } from 'node:child_process';
import { chmodSync, existsSync, mkdirSync, mkdtempSync, readdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import * as os from 'node:os';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
// @ts-expect-error plain JavaScript build helper
import { buildMain, distIsStale } from '../../../build/run-built.mjs';

const require = createRequire(import.meta.url);
const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '../../..');
const config = JSON.parse(readFileSync(path.join(root, 'build', 'electron-builder.json'), 'utf8'));
const asar = require('@electron/asar') as { listPackage(p: string, o: object): string[]; extractFile(p: string, f: string): Buffer };

let dir: string;
let entries: string[] = [];
let asarPath: string;
let builderLog = '';

beforeAll(() => {
  if (distIsStale()) buildMain();
  dir = mkdtempSync(path.join(os.tmpdir(), 'plateau-pack-'));
  // A stub Electron distribution: just the files electron-builder copies and renames. The
  // "binary" carries a fuse wire as Electron's does (the sentinel of @electron/fuses, version 1,
  // 8 fuses in Electron's default states), so the fuses of the config are flipped for real.
  const stub = path.join(dir, 'electron-stub');
  mkdirSync(path.join(stub, 'locales'), { recursive: true });
  const { SENTINEL } = require('@electron/fuses/dist/constants.js') as { SENTINEL: string };
  writeFileSync(path.join(stub, 'electron'), Buffer.concat([Buffer.from('#!/bin/sh\necho stub\nexit 0\n'), Buffer.from(SENTINEL), Buffer.from([1, 8]), Buffer.from('10110001')]));
  chmodSync(path.join(stub, 'electron'), 0o755);
  writeFileSync(path.join(stub, 'version'), 'v41.7.1');
  writeFileSync(path.join(stub, 'locales', 'en-US.pak'), '');
  const out = path.join(dir, 'out');
  const run = spawnSync(
    process.execPath,
    [require.resolve('electron-builder/cli.js'), '--linux', 'dir', '--config', 'build/electron-builder.json', '--publish', 'never', `-c.electronDist=${stub}`, `-c.directories.output=${out}`],
    { cwd: root, encoding: 'utf8', env: { ...process.env, ELECTRON_SKIP_BINARY_DOWNLOAD: '1' }, timeout: 170_000 },
  );
  builderLog = `${run.stdout}\n${run.stderr}`;
  asarPath = path.join(out, 'linux-unpacked', 'resources', 'app.asar');
  if (existsSync(asarPath)) entries = asar.listPackage(asarPath, {}).map((e) => e.split(path.sep).join('/'));
}, 180_000);

afterAll(() => {
  if (dir) rmSync(dir, { recursive: true, force: true });
});

describe('electron-builder configuration', () => {
  it('validates offline against electron-builder 26 schema', async () => {
    const { validateConfiguration } = require('app-builder-lib/out/util/config/config.js');
    const { DebugLogger } = require('builder-util');
    await expect(validateConfiguration(structuredClone(config), new DebugLogger(false))).resolves.toBeUndefined();
    // And the validator does refuse a wrong value (so the check above means something).
    await expect(validateConfiguration({ ...structuredClone(config), nsis: { perMachine: 'yes' } }, new DebugLogger(false))).rejects.toThrow(/perMachine/);
  });

  it('targets the installers asked for, per-user on Windows, never publishes, no auto-update', () => {
    expect(config.win.target).toEqual(['nsis', 'portable']);
    expect(config.nsis).toMatchObject({ perMachine: false, allowElevation: false, oneClick: false });
    expect(config.linux.target).toEqual(['AppImage', 'deb']);
    expect(config.mac.target).toEqual(['dmg']);
    expect(config.publish).toBeNull();
    expect(config.asar).toBe(true);
    const pkg = JSON.parse(readFileSync(path.join(root, 'package.json'), 'utf8'));
    expect(Object.keys({ ...pkg.dependencies, ...pkg.devDependencies })).not.toContain('electron-updater');
    expect(pkg.main).toBe('dist/main/electron/main.js');
  });
});

describe('linux dir package with a stub Electron', () => {
  it('builds app.asar', () => {
    expect(existsSync(asarPath), builderLog.slice(-3000)).toBe(true);
  });

  it('holds the compiled main, preload, worker, engine, resources and production dependencies', () => {
    for (const file of [
      '/package.json',
      '/dist/main/electron/main.js',
      '/dist/main/electron/preload.cjs',
      '/dist/main/start.js',
      '/dist/main/webhost/server.js',
      '/dist/main/worker/engineWorker.js',
      '/dist/main/worker/jobThread.js',
      '/dist/main/worker/saemBlockThread.js',
      '/dist/main/services/appService.js',
      '/dist/main/protocol/index.js',
      '/dist/engine/version.js',
      '/resources/cautions/dosing.json',
      '/node_modules/zod/package.json',
      '/node_modules/ws/package.json',
    ]) {
      expect(entries, file).toContain(file);
    }
    expect(entries.some((e) => e.startsWith('/resources/demo/'))).toBe(true);
    expect(entries.some((e) => e.startsWith('/resources/targets/'))).toBe(true);
    const packaged = JSON.parse(asar.extractFile(asarPath, 'package.json').toString('utf8'));
    expect(packaged.main).toBe('dist/main/electron/main.js');
    expect(packaged.scripts).toBeUndefined();
  });

  it('holds the built renderer, file for file, when it is built', () => {
    const rendererDir = path.join(root, 'dist', 'renderer');
    if (!existsSync(path.join(rendererDir, 'index.html'))) {
      // Checkouts without the renderer build (it comes with the views): nothing to compare.
      expect(entries.some((e) => e.startsWith('/dist/renderer/'))).toBe(false);
      return;
    }
    const files: string[] = [];
    const walk = (d: string, rel: string) => {
      for (const e of readdirSync(d, { withFileTypes: true })) {
        if (e.isDirectory()) walk(path.join(d, e.name), `${rel}/${e.name}`);
        else if (!e.name.endsWith('.map')) files.push(`/dist/renderer${rel}/${e.name}`);
      }
    };
    walk(rendererDir, '');
    for (const f of files) expect(entries, f).toContain(f);
  });

  it('leaves out tests, sources, source maps, build info and dev tools', () => {
    const bad = entries.filter(
      (e) =>
        e.endsWith('.map') ||
        (e.endsWith('.ts') && !e.startsWith('/node_modules/')) ||
        e.startsWith('/dist/tests') ||
        e.startsWith('/tests') ||
        e.startsWith('/engine/') ||
        e.startsWith('/main/') ||
        e.startsWith('/renderer/') ||
        e.startsWith('/build/') ||
        e.includes('tsbuildinfo') ||
        /^\/(tsconfig|vitest\.config|\.ci|\.git|DEVELOPERS\.md|README\.md)/.test(e) ||
        /^\/node_modules\/(electron|electron-builder|vitest|vite|typescript|svelte|@types|playwright-core|chart\.js)(\/|$)/.test(e),
    );
    expect(bad).toEqual([]);
  });

  it('flips the Electron fuses: no run-as-node, no NODE_OPTIONS, no inspector, app only from app.asar', async () => {
    const { getCurrentFuseWire, FuseV1Options } = require('@electron/fuses');
    const { FuseState } = require('@electron/fuses/dist/constants.js');
    const wire = await getCurrentFuseWire(path.join(dir, 'out', 'linux-unpacked', 'plateau'));
    expect(wire[FuseV1Options.RunAsNode]).toBe(FuseState.DISABLE);
    expect(wire[FuseV1Options.EnableNodeOptionsEnvironmentVariable]).toBe(FuseState.DISABLE);
    expect(wire[FuseV1Options.EnableNodeCliInspectArguments]).toBe(FuseState.DISABLE);
    expect(wire[FuseV1Options.OnlyLoadAppFromAsar]).toBe(FuseState.ENABLE);
    expect(wire[FuseV1Options.EnableEmbeddedAsarIntegrityValidation]).toBe(FuseState.ENABLE);
    expect(wire[FuseV1Options.EnableCookieEncryption]).toBe(FuseState.ENABLE);
    expect(wire[FuseV1Options.GrantFileProtocolExtraPrivileges]).toBe(FuseState.DISABLE);
  });

  it('carries no build-machine paths in the app code', () => {
    const withPath = entries
      .filter((e) => e.startsWith('/dist/') && /\.(c?js|html|css|json)$/.test(e))
      .filter((e) => asar.extractFile(asarPath, e.slice(1)).toString('utf8').includes(root));
    expect(withPath).toEqual([]);
  });
});
