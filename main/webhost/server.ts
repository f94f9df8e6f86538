/**
 * The loopback web host: serves the built renderer and the bridge WebSocket on 127.0.0.1 only,
 * on a free port, behind a random token (guard.ts). This is how Plateau runs where the Electron
 * runtime is absent, and how the renderer is tested in real Chromium.
 */
import { createReadStream } from 'node:fs';
import * as http from 'node:http';
import type { AddressInfo } from 'node:net';
import { WebSocketServer } from 'ws';
import type { BridgeBackend } from './backend.js';
import { checkRequest, newToken, tokenCookie } from './guard.js';
import { contentSecurityPolicy, securityHeaders } from './securityHeaders.js';
import { attachBridge, MAX_MESSAGE_BYTES } from './socketBridge.js';
import { lookupStaticFile } from './staticFiles.js';

export interface WebHostOptions {
  /** Folder of the built renderer (index.html and its assets). */
  rendererDir: string;
  backend: BridgeBackend;
  /** 0 (the default) picks a free port. */
  port?: number;
  /** Given for tests; otherwise a fresh random token. */
  token?: string;
  log?: (line: string) => void;
}

export interface WebHost {
  port: number;
  token: string;
  /** The URL to open, with its token. */
  url: string;
  close(): Promise<void>;
}

const NOT_BUILT_PAGE = `<!doctype html><meta charset="utf-8"><title>Plateau</title>
<p>The user interface is not built. Run <code>npm run prepare</code> (or <code>npm ci</code>) and start Plateau again.</p>`;

export async function startWebHost(options: WebHostOptions): Promise<WebHost> {
  const token = options.token ?? newToken();
  const log = options.log ?? ((line: string) => void process.stderr.write(`${line}\n`));
  let port = 0;
  let headers: Record<string, string> = {};

  const refuse = (res: http.ServerResponse, status: number, reason: string) => {
    res.writeHead(status, { ...headers, 'Content-Type': 'text/plain; charset=utf-8', 'Cache-Control': 'no-store' });
    res.end(`${status === 403 ? 'Forbidden' : 'Refused'}: ${reason}\n`);
  };

  const server = http.createServer((req, res) => {
    const verdict = checkRequest(req, port, token);
    if (!verdict.ok) {
      log(`web host: refused ${req.method} ${(req.url ?? '').split('?')[0]}: ${verdict.reason}`);
      refuse(res, verdict.status, verdict.reason);
      return;
    }
    if (req.method !== 'GET' && req.method !== 'HEAD') {
      res.setHeader('Allow', 'GET, HEAD');
      refuse(res, 405, `method ${req.method} is not served`);
      return;
    }
    const extra: Record<string, string> = { 'Cache-Control': 'no-store' };
    if (verdict.tokenFromQuery) extra['Set-Cookie'] = tokenCookie(port, token);
    const pathname = new URL(req.url ?? '/', `http://127.0.0.1:${port}`).pathname;
    void lookupStaticFile(options.rendererDir, pathname).then(
      (found) => {
        if (!found.ok) {
          if (pathname === '/' && found.status === 404) {
            res.writeHead(503, { ...headers, ...extra, 'Content-Type': 'text/html; charset=utf-8' });
            res.end(NOT_BUILT_PAGE);
            return;
          }
          refuse(res, found.status, found.reason);
          return;
        }
        res.writeHead(200, { ...headers, ...extra, 'Content-Type': found.contentType, 'Content-Length': String(found.size) });
        if (req.method === 'HEAD') {
          res.end();
          return;
        }
        const stream = createReadStream(found.filePath);
        stream.on('error', () => res.destroy());
        stream.pipe(res);
      },
      (error: unknown) => refuse(res, 404, `could not read the file (${String(error)})`),
    );
  });
  server.on('clientError', (_error, socket) => socket.destroy());

  const wss = new WebSocketServer({ noServer: true, maxPayload: MAX_MESSAGE_BYTES, perMessageDeflate: false });
  server.on('upgrade', (req, socket, head) => {
    const verdict = checkRequest(req, port, token);
    const pathname = (req.url ?? '').split('?')[0];
    if (!verdict.ok || pathname !== '/ws') {
      const reason = verdict.ok ? `no WebSocket at ${pathname}` : verdict.reason;
      log(`web host: refused a WebSocket: ${reason}`);
      socket.end(`HTTP/1.1 ${verdict.ok ? 404 : verdict.status} Refused\r\nConnection: close\r\nContent-Length: 0\r\n\r\n`);
      return;
    }
    wss.handleUpgrade(req, socket, head, (ws) => attachBridge(ws, options.backend, log));
  });

  await new Promise<void>((resolve, reject) => {
    server.once('error', reject);
    server.listen({ host: '127.0.0.1', port: options.port ?? 0, exclusive: true }, () => {
      server.off('error', reject);
      resolve();
    });
  });
  port = (server.address() as AddressInfo).port;
  headers = securityHeaders(contentSecurityPolicy({ connectSources: [`ws://127.0.0.1:${port}`, `ws://localhost:${port}`] }));

  return {
    port,
    token,
    url: `http://127.0.0.1:${port}/?token=${token}`,
    close: () =>
      new Promise<void>((resolve) => {
        for (const client of wss.clients) client.terminate();
        wss.close();
        server.closeAllConnections();
        server.close(() => resolve());
      }),
  };
}
