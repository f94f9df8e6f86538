/**
 * The app:// protocol: the built renderer served from its folder (inside app.asar when
 * packaged), with the same path checks and security headers as the web host.
 */
import { promises as fs } from 'node:fs';
import type { Session } from 'electron';
import { securityHeaders } from '../webhost/securityHeaders.js';
import { lookupStaticFile } from '../webhost/staticFiles.js';
import { APP_HOST, APP_SCHEME, ELECTRON_CSP } from './security.js';

/** Must run before the app is ready (Electron's rule for privileged schemes). */
export const APP_SCHEME_PRIVILEGES = [
  { scheme: APP_SCHEME, privileges: { standard: true, secure: true, supportFetchAPI: true } },
];

/** Answers one app:// request (exported for the tests). */
export async function answerAppRequest(rendererDir: string, requestUrl: string): Promise<Response> {
  const headers = securityHeaders(ELECTRON_CSP);
  let url: URL;
  try {
    url = new URL(requestUrl);
  } catch {
    return new Response('bad URL', { status: 400, headers });
  }
  if (url.host !== APP_HOST) return new Response('not found', { status: 404, headers });
  const found = await lookupStaticFile(rendererDir, url.pathname);
  if (!found.ok) return new Response(found.reason, { status: found.status, headers });
  const body = await fs.readFile(found.filePath);
  return new Response(body, { status: 200, headers: { ...headers, 'Content-Type': found.contentType } });
}

export function serveAppProtocol(ses: Session, rendererDir: string): void {
  ses.protocol.handle(APP_SCHEME, (request) => answerAppRequest(rendererDir, request.url));
}
