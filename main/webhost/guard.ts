/**
 * Who may talk to the web host: only a browser on this machine that was given the start-up
 * token. Checked on every HTTP request and on the WebSocket upgrade:
 * - the Host header must name the loopback address and our port (defeats DNS rebinding);
 * - an Origin header, when present, must be our own origin (defeats cross-site requests);
 * - a cross-site fetch (Sec-Fetch-Site) is refused;
 * - the token comes in the query (?token=, first load and the WebSocket URL) or in the
 *   HttpOnly SameSite=Strict cookie set on the first load; compared in constant time.
 */
import { randomBytes, timingSafeEqual } from 'node:crypto';
import type { IncomingMessage } from 'node:http';

export function newToken(): string {
  return randomBytes(32).toString('base64url');
}

/** The origins of this host (the URL printed uses 127.0.0.1; localhost is accepted too). */
export function ownOrigins(port: number): string[] {
  return [`http://127.0.0.1:${port}`, `http://localhost:${port}`];
}

/** Cookie name carries the port: cookies are shared by every port of one host name. */
export function cookieName(port: number): string {
  return `plateau_token_${port}`;
}

export function tokenCookie(port: number, token: string): string {
  return `${cookieName(port)}=${token}; HttpOnly; SameSite=Strict; Path=/`;
}

function sameToken(given: string | undefined, token: string): boolean {
  if (given === undefined) return false;
  const a = Buffer.from(given);
  const b = Buffer.from(token);
  return a.length === b.length && timingSafeEqual(a, b);
}

function cookieValue(header: string | undefined, name: string): string | undefined {
  if (!header) return undefined;
  for (const part of header.split(';')) {
    const eq = part.indexOf('=');
    if (eq > 0 && part.slice(0, eq).trim() === name) return part.slice(eq + 1).trim();
  }
  return undefined;
}

export type GuardVerdict = { ok: true; tokenFromQuery: boolean } | { ok: false; status: 400 | 403; reason: string };

/** Check one request (HTTP or WebSocket upgrade) against the rules above. */
export function checkRequest(req: IncomingMessage, port: number, token: string): GuardVerdict {
  const host = req.headers.host;
  if (host !== `127.0.0.1:${port}` && host !== `localhost:${port}`) {
    return { ok: false, status: 403, reason: `Host header ${JSON.stringify(host ?? '')} is not this loopback host` };
  }
  const origin = req.headers.origin;
  if (origin !== undefined && !ownOrigins(port).includes(origin)) {
    return { ok: false, status: 403, reason: `Origin ${JSON.stringify(origin)} is not this host` };
  }
  const fetchSite = req.headers['sec-fetch-site'];
  if (fetchSite === 'cross-site' || fetchSite === 'same-site') {
    return { ok: false, status: 403, reason: `cross-site request (Sec-Fetch-Site: ${String(fetchSite)})` };
  }
  let url: URL;
  try {
    url = new URL(req.url ?? '/', `http://127.0.0.1:${port}`);
  } catch {
    return { ok: false, status: 400, reason: 'the request URL is malformed' };
  }
  const queryTokens = url.searchParams.getAll('token');
  if (queryTokens.length > 1) return { ok: false, status: 403, reason: 'more than one token given' };
  if (queryTokens.length === 1) {
    return sameToken(queryTokens[0], token) ? { ok: true, tokenFromQuery: true } : { ok: false, status: 403, reason: 'wrong token' };
  }
  const cookie = cookieValue(req.headers.cookie, cookieName(port));
  if (cookie === undefined) return { ok: false, status: 403, reason: 'no token (open the URL printed at start, with its ?token=)' };
  return sameToken(cookie, token) ? { ok: true, tokenFromQuery: false } : { ok: false, status: 403, reason: 'wrong token' };
}
