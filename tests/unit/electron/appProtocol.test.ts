/** app:// serves only the built renderer's files, with the security headers. Real files. */
import { mkdtempSync, mkdirSync, rmSync, writeFileSync } from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { afterAll, describe, expect, it, vi } from 'vitest';

vi.mock('electron', () => import('./fakeElectron.js'));
const fake = await import('./fakeElectron.js');
const { answerAppRequest, serveAppProtocol, APP_SCHEME_PRIVILEGES } = await import('../../../main/electron/appProtocol.js');
const { ELECTRON_CSP } = await import('../../../main/electron/security.js');

const dir = mkdtempSync(path.join(os.tmpdir(), 'plateau-appproto-'));
const renderer = path.join(dir, 'renderer');
mkdirSync(path.join(renderer, 'assets'), { recursive: true });
writeFileSync(path.join(renderer, 'index.html'), '<!doctype html><title>t</title>');
writeFileSync(path.join(renderer, 'assets', 'a.css'), 'body{}');
writeFileSync(path.join(dir, 'secret.txt'), 'SECRET');
afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('app:// protocol', () => {
  it('is registered standard and secure, and handled on the session', () => {
    expect(APP_SCHEME_PRIVILEGES).toEqual([{ scheme: 'app', privileges: { standard: true, secure: true, supportFetchAPI: true } }]);
    const ses = new fake.FakeSession();
    serveAppProtocol(ses as never, renderer);
    expect(ses.protocolHandlers.has('app')).toBe(true);
  });

  it('serves index.html and assets with CSP and nosniff', async () => {
    const index = await answerAppRequest(renderer, 'app://plateau/index.html');
    expect(index.status).toBe(200);
    expect(index.headers.get('content-type')).toBe('text/html; charset=utf-8');
    expect(index.headers.get('content-security-policy')).toBe(ELECTRON_CSP);
    expect(index.headers.get('x-content-type-options')).toBe('nosniff');
    expect(await index.text()).toContain('<title>t</title>');
    const css = await answerAppRequest(renderer, 'app://plateau/assets/a.css');
    expect(css.headers.get('content-type')).toBe('text/css; charset=utf-8');
  });

  it('refuses traversal and other hosts', async () => {
    for (const url of ['app://plateau/../secret.txt', 'app://plateau/%2e%2e/secret.txt', 'app://plateau/assets/%2e%2e%2f..%2fsecret.txt', 'app://other/index.html', 'app://plateau/assets/']) {
      const r = await answerAppRequest(renderer, url);
      expect([400, 404], url).toContain(r.status);
      expect(await r.text(), url).not.toContain('SECRET');
    }
  });
});
