/**
 * The web host's doors in a real browser (Debian Chromium through playwright-core): the page
 * opened with its token gets the cookie and talks to the bridge WebSocket without the token in
 * its own URL; the CSP stops the page from reaching any other server; a page served by another
 * local server (another port: same site, so the cookie is sent) cannot open our WebSocket nor
 * read our pages.
 */
import { existsSync, mkdtempSync, mkdirSync, rmSync, writeFileSync } from 'node:fs';
import * as http from 'node:http';
import type { AddressInfo } from 'node:net';
import * as os from 'node:os';
import * as path from 'node:path';
import { chromium, type BrowserContext } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startAppBackend, type RunningBackend } from '../../../main/webhost/appBackend.js';
import { appPathsFromRoot } from '../../../main/webhost/appPaths.js';
import { startWebHost, type WebHost } from '../../../main/webhost/server.js';
import { ensureBuilt, repoRoot } from './built.js';

const CHROMIUM = '/usr/bin/chromium';
const ARGS = ['--headless', '--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run', '--disable-background-networking', '--disable-component-update', '--disable-sync'];

// The page's script: ask app.info over the socket (cookie only), then try a request elsewhere.
const APP_JS = `
const out = {};
const ws = new WebSocket('ws://' + location.host + '/ws');
ws.onerror = () => { out.ws = 'error'; };
ws.onopen = () => ws.send(JSON.stringify({ id: 'a', channel: 'app.info', payload: {} }));
ws.onmessage = async (e) => {
  const m = JSON.parse(e.data);
  if (m.id !== 'a') return;
  out.ws = m.ok ? m.value.host : 'refused';
  try { await fetch(window.OTHER + '/data.json'); out.fetch = 'reached'; } catch { out.fetch = 'blocked'; }
  document.title = JSON.stringify(out);
};
`;

let dir: string;
let services: RunningBackend;
let host: WebHost;
let other: http.Server;
let otherUrl: string;
let context: BrowserContext;
const otherHits: string[] = [];

beforeAll(async () => {
  ensureBuilt();
  dir = mkdtempSync(path.join(os.tmpdir(), 'plateau-chromium-host-'));
  const rendererDir = path.join(dir, 'renderer');
  mkdirSync(rendererDir);
  // A second local server: the "other site" (an attacker page, or a remote resource).
  other = http.createServer((req, res) => {
    otherHits.push(req.url ?? '');
    if (req.url === '/attack.html') {
      res.writeHead(200, { 'Content-Type': 'text/html' });
      res.end(`<!doctype html><script>
        const out = {};
        const ws = new WebSocket('ws://127.0.0.1:' + location.hash.slice(1) + '/ws');
        ws.onopen = () => { out.ws = 'open'; ws.send(JSON.stringify({ id: 'x', channel: 'app.info', payload: {} })); };
        ws.onmessage = () => { out.ws = 'answered'; };
        ws.onerror = () => { out.ws = 'refused'; };
        fetch('http://127.0.0.1:' + location.hash.slice(1) + '/index.html', { credentials: 'include', mode: 'no-cors' })
          .then(() => { out.fetch = 'opaque'; }, () => { out.fetch = 'failed'; })
          .finally(() => setTimeout(() => { document.title = JSON.stringify(out); }, 500));
      </script>`);
      return;
    }
    res.writeHead(200, { 'Content-Type': 'application/json', 'Access-Control-Allow-Origin': '*' });
    res.end('{}');
  });
  await new Promise<void>((r) => other.listen(0, '127.0.0.1', r));
  otherUrl = `http://127.0.0.1:${(other.address() as AddressInfo).port}`;
  writeFileSync(path.join(rendererDir, 'index.html'), `<!doctype html><title>loading</title><script src="config.js"></script><script src="app.js"></script>`);
  writeFileSync(path.join(rendererDir, 'config.js'), `window.OTHER = ${JSON.stringify(otherUrl)};`);
  writeFileSync(path.join(rendererDir, 'app.js'), APP_JS);
  services = await startAppBackend({ paths: appPathsFromRoot(repoRoot, { rendererDir }), projectDir: path.join(dir, 'project'), host: 'web', appVersion: 'test', log: () => {} });
  host = await startWebHost({ rendererDir, backend: services.backend, log: () => {} });
  context = await chromium.launchPersistentContext(path.join(dir, 'profile'), { executablePath: CHROMIUM, headless: true, args: ARGS });
}, 120_000);

afterAll(async () => {
  await context?.close();
  await host?.close();
  await services?.stop();
  other?.close();
  if (dir) rmSync(dir, { recursive: true, force: true });
});

describe.skipIf(!existsSync(CHROMIUM))('web host in Chromium', () => {
  it('the page with its token talks to the bridge by cookie, and the CSP blocks other servers', async () => {
    const page = await context.newPage();
    await page.goto(host.url);
    await page.waitForFunction(() => document.title.startsWith('{'), undefined, { timeout: 30_000 });
    const result = JSON.parse(await page.title());
    expect(result).toEqual({ ws: 'web', fetch: 'blocked' });
    expect(otherHits.filter((u) => u === '/data.json')).toEqual([]);
    // Reloading without the token works through the cookie.
    await page.goto(`http://127.0.0.1:${host.port}/`);
    await page.waitForFunction(() => document.title.startsWith('{'), undefined, { timeout: 30_000 });
    expect(JSON.parse(await page.title()).ws).toBe('web');
    await page.close();
  }, 60_000);

  it('a page from another local server cannot use the bridge even though the browser holds the cookie', async () => {
    const page = await context.newPage();
    // Same browser profile: the cookie from the test above is present and same-site.
    await page.goto(`${otherUrl}/attack.html#${host.port}`);
    await page.waitForFunction(() => document.title.startsWith('{'), undefined, { timeout: 30_000 });
    const result = JSON.parse(await page.title());
    expect(result.ws).toBe('refused');
    await page.close();
  }, 60_000);
});
