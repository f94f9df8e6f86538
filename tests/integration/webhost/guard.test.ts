/**
 * The web host's doors: token, Host header, Origin, loopback only, CSP and static files.
 * Real server, real sockets (node:http and ws clients).
 */
import { mkdtempSync, mkdirSync, rmSync, symlinkSync, writeFileSync } from 'node:fs';
import * as http from 'node:http';
import * as os from 'node:os';
import * as path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import WebSocket from 'ws';
import type { BridgeBackend } from '../../../main/webhost/backend.js';
import { startWebHost, type WebHost } from '../../../main/webhost/server.js';

// The doors are checked before any request reaches the services, so a backend that refuses
// everything is enough here; the bridge with the real services is tested in bridge.test.ts.
const closedBackend: BridgeBackend = {
  parseRequest: () => ({ ok: false, error: { kind: 'usage', message: 'no services in this test', problems: [] } }),
  handle: async () => ({ ok: false, error: { kind: 'usage', message: 'no services in this test', problems: [] } }),
  subscribe: () => () => {},
};

interface Reply {
  status: number;
  headers: http.IncomingHttpHeaders;
  body: string;
}

function get(port: number, pathAndQuery: string, headers: Record<string, string> = {}, host = '127.0.0.1'): Promise<Reply> {
  return new Promise((resolve, reject) => {
    const req = http.request({ host, port, path: pathAndQuery, method: 'GET', headers: { Host: `127.0.0.1:${port}`, ...headers } }, (res) => {
      let body = '';
      res.setEncoding('utf8');
      res.on('data', (c: string) => (body += c));
      res.on('end', () => resolve({ status: res.statusCode ?? 0, headers: res.headers, body }));
    });
    req.on('error', reject);
    req.end();
  });
}

function wsOutcome(url: string, headers: Record<string, string> = {}): Promise<'open' | number | string> {
  return new Promise((resolve) => {
    const socket = new WebSocket(url, { headers });
    socket.on('open', () => {
      socket.close();
      resolve('open');
    });
    socket.on('unexpected-response', (_req, res) => resolve(res.statusCode ?? 0));
    socket.on('error', (e) => resolve(e.message));
  });
}

let dir: string;
let host: WebHost;
const logged: string[] = [];

beforeAll(async () => {
  dir = mkdtempSync(path.join(os.tmpdir(), 'plateau-webhost-'));
  const renderer = path.join(dir, 'renderer');
  mkdirSync(path.join(renderer, 'assets'), { recursive: true });
  writeFileSync(path.join(renderer, 'index.html'), '<!doctype html><title>Plateau test</title><script type="module" src="/assets/app.js"></script>');
  writeFileSync(path.join(renderer, 'assets', 'app.js'), 'console.log(1);');
  writeFileSync(path.join(renderer, '.hidden'), 'secret');
  writeFileSync(path.join(dir, 'outside.txt'), 'CONTENT-OUTSIDE');
  symlinkSync(path.join(dir, 'outside.txt'), path.join(renderer, 'link.txt'));
  host = await startWebHost({ rendererDir: renderer, backend: closedBackend, token: 'test-token-0123456789', log: (l) => logged.push(l) });
});

afterAll(async () => {
  await host.close();
  rmSync(dir, { recursive: true, force: true });
});

describe('web host doors', () => {
  it('prints a loopback URL with the token and listens on 127.0.0.1 only', async () => {
    expect(host.url).toBe(`http://127.0.0.1:${host.port}/?token=test-token-0123456789`);
    // Another local address of this machine (if any) must not answer.
    const others = Object.values(os.networkInterfaces()).flat().filter((i) => i && i.family === 'IPv4' && i.address !== '127.0.0.1');
    for (const other of others) {
      await expect(get(host.port, '/', {}, other!.address)).rejects.toThrow();
    }
    // IPv6 loopback is a different socket: not bound either.
    await expect(get(host.port, '/', {}, '::1')).rejects.toThrow();
  });

  it('generates a fresh long token when none is given', async () => {
    const other = await startWebHost({ rendererDir: dir, backend: closedBackend, log: () => {} });
    try {
      expect(other.token).toMatch(/^[A-Za-z0-9_-]{43}$/);
      expect(other.token).not.toBe(host.token);
    } finally {
      await other.close();
    }
  });

  it('refuses a request without a token, with a wrong token, or two tokens', async () => {
    expect((await get(host.port, '/')).status).toBe(403);
    expect((await get(host.port, '/?token=wrong')).status).toBe(403);
    expect((await get(host.port, '/?token=test-token-0123456789x')).status).toBe(403);
    expect((await get(host.port, '/?token=test-token-0123456789&token=wrong')).status).toBe(403);
    expect((await get(host.port, '/assets/app.js', { Cookie: `plateau_token_${host.port}=wrong` })).status).toBe(403);
    // A cookie for another port is not ours.
    expect((await get(host.port, '/assets/app.js', { Cookie: `plateau_token_1=test-token-0123456789` })).status).toBe(403);
  });

  it('serves the renderer with the token, sets an HttpOnly SameSite=Strict cookie, then accepts the cookie', async () => {
    const first = await get(host.port, '/?token=test-token-0123456789');
    expect(first.status).toBe(200);
    expect(first.body).toContain('Plateau test');
    expect(first.headers['content-type']).toBe('text/html; charset=utf-8');
    const cookie = String(first.headers['set-cookie']);
    expect(cookie).toContain(`plateau_token_${host.port}=test-token-0123456789`);
    expect(cookie).toContain('HttpOnly');
    expect(cookie).toContain('SameSite=Strict');
    const asset = await get(host.port, '/assets/app.js', { Cookie: `plateau_token_${host.port}=test-token-0123456789` });
    expect(asset.status).toBe(200);
    expect(asset.headers['content-type']).toBe('text/javascript; charset=utf-8');
    expect(asset.body).toBe('console.log(1);');
  });

  it('sends a strict CSP (self only, the bridge socket as the only connection) and nosniff', async () => {
    const reply = await get(host.port, '/?token=test-token-0123456789');
    const csp = String(reply.headers['content-security-policy']);
    expect(csp).toContain("default-src 'self'");
    expect(csp).toContain("script-src 'self'");
    expect(csp).toContain(`connect-src ws://127.0.0.1:${host.port} ws://localhost:${host.port}`);
    expect(csp).toContain("object-src 'none'");
    expect(csp).toContain("frame-ancestors 'none'");
    expect(csp).not.toMatch(/unsafe-eval|https?:|\*/);
    expect(reply.headers['x-content-type-options']).toBe('nosniff');
    expect(reply.headers['x-frame-options']).toBe('DENY');
    expect(reply.headers['referrer-policy']).toBe('no-referrer');
    // Refusals carry the headers too.
    expect((await get(host.port, '/')).headers['content-security-policy']).toBe(csp);
  });

  it('refuses a non-loopback Host header (DNS rebinding) even with the right token', async () => {
    for (const badHost of ['evil.example:' + host.port, `127.0.0.1:${host.port + 1}`, '127.0.0.1', `0.0.0.0:${host.port}`]) {
      const reply = await get(host.port, '/?token=test-token-0123456789', { Host: badHost });
      expect(reply.status, badHost).toBe(403);
    }
    expect((await get(host.port, '/?token=test-token-0123456789', { Host: `localhost:${host.port}` })).status).toBe(200);
  });

  it('refuses a foreign Origin and cross-site fetches even with the right token', async () => {
    expect((await get(host.port, '/?token=test-token-0123456789', { Origin: 'http://evil.example' })).status).toBe(403);
    expect((await get(host.port, '/?token=test-token-0123456789', { Origin: `http://127.0.0.1:${host.port + 1}` })).status).toBe(403);
    expect((await get(host.port, '/?token=test-token-0123456789', { Origin: 'null' })).status).toBe(403);
    expect((await get(host.port, '/?token=test-token-0123456789', { 'Sec-Fetch-Site': 'cross-site' })).status).toBe(403);
    expect((await get(host.port, '/?token=test-token-0123456789', { Origin: `http://127.0.0.1:${host.port}` })).status).toBe(200);
  });

  it('never leaves the renderer folder: traversal, encoded traversal, hidden files, symlinks', async () => {
    const auth = { Cookie: `plateau_token_${host.port}=test-token-0123456789` };
    for (const p of ['/../outside.txt', '/%2e%2e/outside.txt', '/assets/%2e%2e/%2e%2e/outside.txt', '/..%2foutside.txt', '/assets/..%5c..%5coutside.txt', '/.hidden', '/link.txt', '/assets/', '/assets', '/%00', '/%zz']) {
      const reply = await get(host.port, p, auth);
      expect([400, 404], p).toContain(reply.status);
      expect(reply.body, p).not.toContain('CONTENT-OUTSIDE');
      expect(reply.body, p).not.toContain('secret');
    }
  });

  it('serves only GET and HEAD', async () => {
    const status = await new Promise<number>((resolve, reject) => {
      const req = http.request({ host: '127.0.0.1', port: host.port, path: '/?token=test-token-0123456789', method: 'POST' }, (res) => {
        res.resume();
        resolve(res.statusCode ?? 0);
      });
      req.on('error', reject);
      req.end('x');
    });
    expect(status).toBe(405);
  });

  it('WebSocket: refuses no token, a wrong token, a foreign Origin, a non-loopback Host, another path; accepts the token or cookie', async () => {
    const base = `ws://127.0.0.1:${host.port}`;
    expect(await wsOutcome(`${base}/ws`)).toBe(403);
    expect(await wsOutcome(`${base}/ws?token=wrong`)).toBe(403);
    expect(await wsOutcome(`${base}/ws?token=test-token-0123456789`, { Origin: 'http://evil.example' })).toBe(403);
    expect(await wsOutcome(`${base}/ws?token=test-token-0123456789`, { Host: 'evil.example' })).toBe(403);
    expect(await wsOutcome(`${base}/other?token=test-token-0123456789`)).toBe(404);
    expect(await wsOutcome(`${base}/ws?token=test-token-0123456789`, { Origin: `http://127.0.0.1:${host.port}` })).toBe('open');
    expect(await wsOutcome(`${base}/ws`, { Cookie: `plateau_token_${host.port}=test-token-0123456789` })).toBe('open');
    expect(logged.some((l) => l.includes('refused a WebSocket'))).toBe(true);
  });
});
