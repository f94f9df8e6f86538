/**
 * Hardening of every session and web contents of the app: the renderer may load only the app's
 * own protocol; navigation, new windows, webviews, permission requests and downloads are denied;
 * every network request outside app:// is cancelled; the CSP is set on every response.
 */
import type { Session, WebContents } from 'electron';
import { contentSecurityPolicy } from '../webhost/securityHeaders.js';

export const APP_SCHEME = 'app';
export const APP_HOST = 'plateau';
export const APP_ORIGIN = `${APP_SCHEME}://${APP_HOST}`;
export const APP_INDEX_URL = `${APP_ORIGIN}/index.html`;

/** No network connection at all in the app: the bridge is IPC. */
export const ELECTRON_CSP = contentSecurityPolicy({ connectSources: [] });

export function isAppUrl(url: string): boolean {
  try {
    const u = new URL(url);
    return u.protocol === `${APP_SCHEME}:` && u.host === APP_HOST;
  } catch {
    return false;
  }
}

export type Log = (line: string) => void;

export function hardenSession(ses: Session, log: Log): void {
  ses.setPermissionRequestHandler((_contents, permission, callback) => {
    log(`denied a permission request: ${permission}`);
    callback(false);
  });
  ses.setPermissionCheckHandler(() => false);
  ses.setDevicePermissionHandler(() => false);
  ses.webRequest.onBeforeRequest((details, callback) => {
    // devtools:// only exists when the developer tools are open in a development run.
    // data: and blob: are local (inline images, downloads the page builds itself).
    const allowed = isAppUrl(details.url) || /^(data|blob|devtools):/.test(details.url);
    if (!allowed) log(`blocked a network request to ${details.url.slice(0, 200)}`);
    callback({ cancel: !allowed });
  });
  ses.webRequest.onHeadersReceived((details, callback) => {
    const headers: Record<string, string[]> = Object.create(null);
    for (const [name, value] of Object.entries(details.responseHeaders ?? {})) {
      if (name.toLowerCase() !== 'content-security-policy') headers[name] = value;
    }
    headers['Content-Security-Policy'] = [ELECTRON_CSP];
    callback({ responseHeaders: headers });
  });
  ses.on('will-download', (event, item) => {
    // A file the page built (blob:/data:) is saved through the native save dialog, as the web
    // renderer's download; nothing else is ever downloaded.
    const url = item.getURL();
    if (url.startsWith(`blob:${APP_ORIGIN}/`) || url.startsWith('data:')) return;
    log(`blocked a download from ${url.slice(0, 200)}`);
    event.preventDefault();
  });
}

export function hardenWebContents(contents: WebContents, log: Log): void {
  contents.on('will-navigate', (event, url) => {
    log(`blocked navigation to ${String(url).slice(0, 200)}`);
    event.preventDefault();
  });
  contents.on('will-redirect', (event, url) => {
    if (!isAppUrl(String(url))) {
      log(`blocked a redirect to ${String(url).slice(0, 200)}`);
      event.preventDefault();
    }
  });
  contents.on('will-attach-webview', (event) => {
    log('blocked a webview');
    event.preventDefault();
  });
  contents.setWindowOpenHandler(({ url }) => {
    log(`blocked a new window for ${url.slice(0, 200)}`);
    return { action: 'deny' };
  });
}
