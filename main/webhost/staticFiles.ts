/**
 * Resolving a request path to a file of the built renderer, for the web host and Electron's app
 * protocol: no directory traversal (encoded or not), no hidden files, no symlink out of the
 * folder, no directory listing.
 */
import { promises as fs } from 'node:fs';
import * as path from 'node:path';

const MIME_TYPES: ReadonlyMap<string, string> = new Map([
  ['.html', 'text/html; charset=utf-8'],
  ['.js', 'text/javascript; charset=utf-8'],
  ['.mjs', 'text/javascript; charset=utf-8'],
  ['.css', 'text/css; charset=utf-8'],
  ['.json', 'application/json; charset=utf-8'],
  ['.svg', 'image/svg+xml'],
  ['.png', 'image/png'],
  ['.ico', 'image/x-icon'],
  ['.woff2', 'font/woff2'],
  ['.woff', 'font/woff'],
  ['.txt', 'text/plain; charset=utf-8'],
  ['.wasm', 'application/wasm'],
]);

export function contentTypeOf(filePath: string): string {
  return MIME_TYPES.get(path.extname(filePath).toLowerCase()) ?? 'application/octet-stream';
}

export type StaticLookup =
  | { ok: true; filePath: string; contentType: string; size: number }
  | { ok: false; status: 400 | 404; reason: string };

/**
 * The file under `rootDir` named by a URL path ('/' is index.html). The path is decoded once;
 * any '..', '.' segment, backslash, NUL or hidden segment is refused, and the real path must
 * still lie inside the real root (symlinks cannot lead out).
 */
export async function lookupStaticFile(rootDir: string, urlPath: string): Promise<StaticLookup> {
  let decoded: string;
  try {
    decoded = decodeURIComponent(urlPath);
  } catch {
    return { ok: false, status: 400, reason: 'the path is not valid percent-encoding' };
  }
  if (!decoded.startsWith('/') || decoded.includes('\\') || decoded.includes('\0')) {
    return { ok: false, status: 400, reason: 'the path has a backslash, a NUL or no leading slash' };
  }
  const relative = decoded === '/' ? 'index.html' : decoded.slice(1);
  const segments = relative.split('/');
  if (segments.some((s) => s === '' || s === '.' || s === '..' || s.startsWith('.'))) {
    return { ok: false, status: 400, reason: 'the path has an empty, dot or hidden segment' };
  }
  let realRoot: string;
  let realFile: string;
  try {
    realRoot = await fs.realpath(rootDir);
    realFile = await fs.realpath(path.join(realRoot, ...segments));
  } catch {
    return { ok: false, status: 404, reason: 'no such file' };
  }
  if (!realFile.startsWith(realRoot + path.sep)) return { ok: false, status: 404, reason: 'outside the renderer folder' };
  const stat = await fs.stat(realFile);
  if (!stat.isFile()) return { ok: false, status: 404, reason: 'not a file' };
  return { ok: true, filePath: realFile, contentType: contentTypeOf(realFile), size: stat.size };
}
