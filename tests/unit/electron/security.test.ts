/** Electron wiring with the electron module faked at its boundary: window, CSP, denials. */
import { describe, expect, it, vi } from 'vitest';

vi.mock('electron', () => import('./fakeElectron.js'));

const fake = await import('./fakeElectron.js');
const { hardenSession, hardenWebContents, ELECTRON_CSP, APP_INDEX_URL, isAppUrl } = await import('../../../main/electron/security.js');
const { mainWindowOptions, createMainWindow } = await import('../../../main/electron/window.js');

function collect() {
  const lines: string[] = [];
  return { lines, log: (l: string) => void lines.push(l) };
}

describe('the app window', () => {
  it('is isolated, sandboxed, without Node, with web security and no webviews', () => {
    const options = mainWindowOptions('/app/dist/main/electron/preload.cjs', false);
    const web = options.webPreferences!;
    expect(web.contextIsolation).toBe(true);
    expect(web.sandbox).toBe(true);
    expect(web.nodeIntegration).toBe(false);
    expect(web.nodeIntegrationInWorker).toBe(false);
    expect(web.nodeIntegrationInSubFrames).toBe(false);
    expect(web.webSecurity).toBe(true);
    expect(web.allowRunningInsecureContent).toBe(false);
    expect(web.webviewTag).toBe(false);
    expect(web.devTools).toBe(false);
    expect(web.preload).toBe('/app/dist/main/electron/preload.cjs');
  });

  it('loads the renderer from app://, never a remote URL, and shows when ready', () => {
    const window = createMainWindow('/p.cjs', false) as unknown as InstanceType<typeof fake.BrowserWindow>;
    expect(window.loadedUrl).toBe('app://plateau/index.html');
    expect(APP_INDEX_URL).toBe('app://plateau/index.html');
    expect(window.shown).toBe(false);
    window.emit('ready-to-show');
    expect(window.shown).toBe(true);
  });

  it('app URLs are only app://plateau', () => {
    expect(isAppUrl('app://plateau/index.html')).toBe(true);
    for (const u of ['app://other/index.html', 'https://plateau/', 'file:///etc/passwd', 'http://127.0.0.1/', 'not a url']) expect(isAppUrl(u), u).toBe(false);
  });
});

describe('session hardening', () => {
  const ses = new fake.FakeSession();
  const { lines, log } = collect();
  hardenSession(ses as never, log);

  it('denies every permission request and check', () => {
    for (const permission of ['media', 'geolocation', 'notifications', 'clipboard-read', 'openExternal']) {
      let granted: boolean | undefined;
      ses.permissionRequestHandler!({}, permission, (g: boolean) => (granted = g), {});
      expect(granted, permission).toBe(false);
      expect(ses.permissionCheckHandler!({}, permission, 'app://plateau', {})).toBe(false);
    }
    expect(ses.devicePermissionHandler!({})).toBe(false);
    expect(lines.some((l) => l.includes('denied a permission request: media'))).toBe(true);
  });

  it('cancels every network request outside the app protocol', () => {
    const verdict = (url: string) => {
      let cancel: boolean | undefined;
      ses.beforeRequest!({ url }, (r: { cancel: boolean }) => (cancel = r.cancel));
      return cancel;
    };
    for (const url of ['https://example.org/x.js', 'http://127.0.0.1:8080/', 'ws://127.0.0.1:1/ws', 'file:///etc/passwd', 'ftp://a/b', 'app://other/x']) expect(verdict(url), url).toBe(true);
    for (const url of ['app://plateau/index.html', 'app://plateau/assets/app.js', 'data:image/png;base64,AA==', 'blob:app://plateau/1234']) expect(verdict(url), url).toBe(false);
    expect(lines.some((l) => l.includes('blocked a network request to https://example.org/x.js'))).toBe(true);
  });

  it('sets the strict CSP on every response, replacing any other', () => {
    let result: { responseHeaders: Record<string, string[]> } | undefined;
    ses.headersReceived!({ url: 'app://plateau/index.html', responseHeaders: { 'content-security-policy': ['default-src *'], 'Content-Type': ['text/html'] } }, (r: typeof result) => (result = r));
    expect(result!.responseHeaders['Content-Security-Policy']).toEqual([ELECTRON_CSP]);
    expect(result!.responseHeaders['content-security-policy']).toBeUndefined();
    expect(result!.responseHeaders['Content-Type']).toEqual(['text/html']);
    expect(ELECTRON_CSP).toContain("default-src 'self'");
    expect(ELECTRON_CSP).toContain("script-src 'self'");
    expect(ELECTRON_CSP).toContain("connect-src 'none'");
    expect(ELECTRON_CSP).not.toMatch(/unsafe-eval|https?:|ws:|\*/);
  });

  it('lets the page save a file it built (blob:) and blocks any other download', () => {
    const download = (url: string) => {
      const event = new fake.FakeEvent();
      ses.emit('will-download', event, { getURL: () => url, getFilename: () => 'x' });
      return event.defaultPrevented;
    };
    expect(download('https://example.org/x.exe')).toBe(true);
    expect(download('blob:app://plateau/0f0e')).toBe(false);
  });
});

describe('web contents hardening', () => {
  const contents = new fake.FakeWebContents();
  const { lines, log } = collect();
  hardenWebContents(contents as never, log);

  it('denies navigation, redirects away, webviews and new windows', () => {
    for (const url of ['https://example.org/', 'app://plateau/other.html', 'file:///etc/passwd']) {
      const event = new fake.FakeEvent();
      contents.emit('will-navigate', event, url);
      expect(event.defaultPrevented, url).toBe(true);
    }
    const redirect = new fake.FakeEvent();
    contents.emit('will-redirect', redirect, 'https://example.org/');
    expect(redirect.defaultPrevented).toBe(true);
    const webview = new fake.FakeEvent();
    contents.emit('will-attach-webview', webview, {}, {});
    expect(webview.defaultPrevented).toBe(true);
    expect(contents.windowOpenHandler!({ url: 'https://example.org/' })).toEqual({ action: 'deny' });
    expect(contents.windowOpenHandler!({ url: 'app://plateau/index.html' })).toEqual({ action: 'deny' });
    expect(lines.some((l) => l.startsWith('blocked navigation to https://example.org/'))).toBe(true);
  });
});
