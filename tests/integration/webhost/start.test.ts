/**
 * Start-up as a user runs it: `npm start` without the Electron runtime says so in one line and
 * starts the web host, printing one URL line with the token; `--web --no-open` starts the web
 * host alone; Ctrl-C / SIGTERM stops it cleanly. `npm run plateau` runs dist without compiling
 * when dist is current. Real processes.
 */
import { spawn, spawnSync, type ChildProcess } from 'node:child_process';
import { mkdtempSync, rmSync } from 'node:fs';
import * as http from 'node:http';
import * as os from 'node:os';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, describe, expect, it } from 'vitest';
// @ts-expect-error plain JavaScript build helper
import { buildMain, distIsStale } from '../../../build/run-built.mjs';
import { parseStartArgs } from '../../../main/start.js';

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '../../..');
if (distIsStale()) buildMain();
const dir = mkdtempSync(path.join(os.tmpdir(), 'plateau-start-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

const URL_LINE = /^Plateau is running at (http:\/\/127\.0\.0\.1:(\d+)\/\?token=([A-Za-z0-9_-]{43}))$/;

function startPlateau(args: string[]): Promise<{ child: ChildProcess; lines: string[]; url: string; port: number; token: string }> {
  const child = spawn(process.execPath, ['build/run-built.mjs', 'dist/main/start.js', ...args, '--project', path.join(dir, `p${args.join('')}`)], {
    cwd: root,
    stdio: ['ignore', 'pipe', 'pipe'],
  });
  const lines: string[] = [];
  return new Promise((resolve, reject) => {
    let buffer = '';
    let stderr = '';
    child.stderr!.on('data', (c) => (stderr += String(c)));
    child.stdout!.on('data', (chunk) => {
      buffer += String(chunk);
      const parts = buffer.split('\n');
      buffer = parts.pop()!;
      for (const line of parts) {
        lines.push(line);
        const m = URL_LINE.exec(line);
        if (m) resolve({ child, lines, url: m[1], port: Number(m[2]), token: m[3] });
      }
    });
    child.on('exit', (code) => reject(new Error(`start exited ${code} before the URL line: ${lines.join('\n')}\n${stderr}`)));
  });
}

function get(url: string): Promise<{ status: number; csp: string | undefined }> {
  return new Promise((resolve, reject) => {
    http.get(url, (res) => {
      res.resume();
      resolve({ status: res.statusCode ?? 0, csp: res.headers['content-security-policy'] as string | undefined });
    }).on('error', reject);
  });
}

function stop(child: ChildProcess): Promise<number | null> {
  return new Promise((resolve) => {
    child.once('exit', (code) => resolve(code));
    child.kill('SIGTERM');
  });
}

describe('npm start', () => {
  it('--web --no-open prints one URL line with a token and serves it', async () => {
    const started = await startPlateau(['--web', '--no-open']);
    try {
      expect(started.lines.filter((l) => l.trim() !== '')).toEqual([`Plateau is running at ${started.url}`]);
      const page = await get(started.url);
      // 200 with the built renderer, 503 "not built" without it: served either way, with the CSP.
      expect([200, 503]).toContain(page.status);
      expect(page.csp).toContain(`connect-src ws://127.0.0.1:${started.port}`);
      expect((await get(`http://127.0.0.1:${started.port}/`)).status).toBe(403);
    } finally {
      expect(await stop(started.child)).toBe(0);
    }
  }, 120_000);

  it('without the Electron runtime says so in one line, then starts the web host', async () => {
    const started = await startPlateau(['--no-open']);
    try {
      const before = started.lines.slice(0, started.lines.length - 1).filter((l) => l.trim() !== '');
      expect(before).toHaveLength(1);
      expect(before[0]).toMatch(/Electron runtime is not installed.*web host/);
    } finally {
      await stop(started.child);
    }
  }, 120_000);

  it('refuses unknown options and bad ports with a clear message', () => {
    expect(parseStartArgs(['--bogus'])).toMatchObject({ error: expect.stringContaining('unknown option "--bogus"') });
    expect(parseStartArgs(['--port', 'x'])).toMatchObject({ error: expect.stringContaining('--port needs a port number') });
    expect(parseStartArgs(['--project'])).toMatchObject({ error: '--project needs a folder' });
    expect(parseStartArgs(['--web', '--no-open', '--port', '0'])).toEqual({ web: true, open: false, port: 0 });
    const run = spawnSync(process.execPath, ['build/run-built.mjs', 'dist/main/start.js', '--bogus'], { cwd: root, encoding: 'utf8' });
    expect(run.status).toBe(2);
    expect(run.stderr).toContain('unknown option');
  });
});

describe('npm run plateau', () => {
  it('runs the built CLI without compiling when dist is current', () => {
    const run = spawnSync(process.execPath, ['build/run-built.mjs', 'dist/main/cli/plateau.js', 'models', '--json'], { cwd: root, encoding: 'utf8' });
    expect(run.status).toBe(0);
    expect(run.stderr).not.toContain('compiling');
    expect(JSON.parse(run.stdout).length ?? Object.keys(JSON.parse(run.stdout)).length).toBeGreaterThan(0);
  });
});
