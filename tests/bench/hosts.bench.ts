/**
 * The hosts: web host start to first byte (services on a fresh project, then the server, then a
 * GET of the page with its token), and `npm start -- --web --no-open` to the URL line (target
 * < 2 s), both with and without npm's own start-up. Medians of a few runs. Figures only.
 */
import { spawn } from 'node:child_process';
import { mkdtempSync, rmSync } from 'node:fs';
import * as http from 'node:http';
import * as os from 'node:os';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';
import { startAppBackend } from '../../main/webhost/appBackend.js';
import { appPathsFromRoot } from '../../main/webhost/appPaths.js';
import { startWebHost } from '../../main/webhost/server.js';

interface Figure { name: string; value: number; unit: string; target?: string; note?: string }

// dist/tests/bench/hosts.bench.js -> the repository root.
const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..', '..', '..');

function median(values: number[]): number {
  const s = [...values].sort((a, b) => a - b);
  return s[Math.floor(s.length / 2)];
}

function firstByte(url: string): Promise<void> {
  return new Promise((resolve, reject) => {
    http
      .get(url, (res) => {
        res.once('data', () => {
          res.destroy();
          resolve();
        });
        res.once('end', () => resolve());
      })
      .on('error', reject);
  });
}

function timeToUrlLine(command: string, args: string[], projectDir: string): Promise<number> {
  const t0 = performance.now();
  // Its own process group, so the whole tree (npm, its shell, node) is stopped together.
  const detached = process.platform !== 'win32';
  const child = spawn(command, [...args, '--project', projectDir], { cwd: root, stdio: ['ignore', 'pipe', 'ignore'], shell: !detached, detached });
  const stop = () => {
    if (detached && child.pid !== undefined) process.kill(-child.pid, 'SIGTERM');
    else child.kill('SIGTERM');
  };
  return new Promise((resolve, reject) => {
    let out = '';
    let ms: number | undefined;
    child.stdout!.on('data', (c) => {
      out += String(c);
      if (ms === undefined && /Plateau is running at http:\/\/127\.0\.0\.1:\d+\/\?token=\S+/.test(out)) {
        ms = performance.now() - t0;
        stop();
      }
    });
    child.once('exit', (code) => (ms !== undefined ? resolve(ms) : reject(new Error(`start exited ${code} before printing the URL`))));
  });
}

export const suite = {
  name: 'hosts',
  async run(): Promise<Figure[]> {
    const dir = mkdtempSync(path.join(os.tmpdir(), 'plateau-bench-hosts-'));
    try {
      const paths = appPathsFromRoot(root);
      const servicesMs: number[] = [];
      const firstByteMs: number[] = [];
      for (let i = 0; i < 5; i++) {
        const t0 = performance.now();
        const services = await startAppBackend({ paths, projectDir: path.join(dir, `p${i}`), host: 'web', appVersion: 'bench', log: () => {} });
        const t1 = performance.now();
        const host = await startWebHost({ rendererDir: paths.rendererDir, backend: services.backend, log: () => {} });
        await firstByte(host.url);
        firstByteMs.push(performance.now() - t1);
        servicesMs.push(t1 - t0);
        await host.close();
        await services.stop();
      }
      const direct: number[] = [];
      const viaNpm: number[] = [];
      for (let i = 0; i < 3; i++) {
        direct.push(await timeToUrlLine(process.execPath, ['build/run-built.mjs', 'dist/main/start.js', '--web', '--no-open'], path.join(dir, `d${i}`)));
        viaNpm.push(await timeToUrlLine(process.platform === 'win32' ? 'npm.cmd' : 'npm', ['start', '--silent', '--', '--web', '--no-open'], path.join(dir, `n${i}`)));
      }
      return [
        { name: 'web host start to first byte', value: median(firstByteMs), unit: 'ms', note: 'server listening + token check + first byte of the page; median of 5' },
        { name: 'services start (first run: demo project created)', value: median(servicesMs), unit: 'ms', note: 'project store + fit queue; median of 5' },
        { name: 'npm start -- --web --no-open to URL line', value: median(viaNpm), unit: 'ms', target: '< 2000', note: 'median of 3, fresh project each' },
        { name: 'node build/run-built.mjs dist/main/start.js to URL line', value: median(direct), unit: 'ms', target: '< 2000', note: 'without npm; median of 3' },
      ];
    } finally {
      rmSync(dir, { recursive: true, force: true });
    }
  },
};
