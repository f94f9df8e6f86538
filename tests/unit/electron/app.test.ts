/**
 * The Electron app wired from its parts, with the electron module faked at its boundary and the
 * real application services behind it (a fresh project folder): single-instance lock, privileged
 * scheme and sandbox before ready, the window and its preload, the IPC gatekeeper answering only
 * the app's own window, events to that window only, the menu.
 */
import { mkdtempSync, rmSync } from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { afterAll, describe, expect, it, vi } from 'vitest';
import { CHANNELS } from '../../../main/protocol/index.js';
import { ensureBuilt, repoRoot } from '../../integration/webhost/built.js';

vi.mock('electron', () => import('./fakeElectron.js'));
const fake = await import('./fakeElectron.js');
const { bootstrap } = await import('../../../main/electron/app.js');
const { EVENT_CHANNEL } = await import('../../../main/electron/ipc.js');

ensureBuilt();
const dir = mkdtempSync(path.join(os.tmpdir(), 'plateau-electron-app-'));
const logged: string[] = [];
const log = (l: string) => void logged.push(l);

// A second instance first (the lock is held elsewhere): it must quit and register nothing.
fake.app.singleInstance = false;
await bootstrap({ argv: [], log }).ready;
const secondInstance = { quitCalls: fake.app.quitCalls, privileged: [...fake.protocol.privileged], handlers: fake.ipcMain.handlers.size };
fake.app.singleInstance = true;

describe('a second instance', () => {
  it('quits at once and registers nothing', () => {
    expect(secondInstance).toEqual({ quitCalls: 1, privileged: [], handlers: 0 });
  });
});

fake.app.appPath = repoRoot;
const running = bootstrap({ argv: ['electron', '.', '--project', path.join(dir, 'project')], log });
fake.app.fireReady();
await running.ready;
const window = running.window() as unknown as InstanceType<typeof fake.BrowserWindow>;
afterAll(async () => {
  // Stop the services as the app does before quitting.
  const event = new fake.FakeEvent();
  fake.app.emit('will-quit', event);
  expect(event.defaultPrevented).toBe(true);
  await vi.waitFor(() => expect(fake.app.quitCalls).toBeGreaterThanOrEqual(2), { timeout: 10_000 });
  rmSync(dir, { recursive: true, force: true });
});

function ownEvent() {
  return { sender: window.webContents, senderFrame: window.webContents.mainFrame };
}

describe('the app', () => {
  it('registers app:// as privileged and enables the sandbox before ready', () => {
    expect(fake.protocol.privileged).toEqual([{ scheme: 'app', privileges: { standard: true, secure: true, supportFetchAPI: true } }]);
    expect(fake.app.sandboxEnabled).toBe(true);
    expect(fake.app.listenerCount('web-contents-created')).toBe(1);
  });

  it('hardens the default session and serves app:// on it', () => {
    const ses = fake.session.defaultSession;
    expect(ses.permissionRequestHandler).toBeDefined();
    expect(ses.beforeRequest).toBeDefined();
    expect(ses.headersReceived).toBeDefined();
    expect(ses.protocolHandlers.has('app')).toBe(true);
  });

  it('opens one sandboxed window on app:// with the compiled preload', () => {
    expect(fake.BrowserWindow.instances).toHaveLength(1);
    expect(window.loadedUrl).toBe('app://plateau/index.html');
    const web = window.options.webPreferences;
    expect(web).toMatchObject({ contextIsolation: true, sandbox: true, nodeIntegration: false, webSecurity: true });
    expect(web.preload).toBe(path.join(repoRoot, 'dist', 'main', 'electron', 'preload.cjs'));
  });

  it('registers a handler for every protocol channel and the host channels', () => {
    for (const c of CHANNELS) expect(fake.ipcMain.handlers.has(c), c).toBe(true);
    expect(fake.ipcMain.handlers.has('host.openFile')).toBe(true);
    expect(fake.ipcMain.handlers.has('host.saveFile')).toBe(true);
  });

  it('answers the app window from the real services', async () => {
    const info = await fake.ipcMain.handlers.get('app.info')!(ownEvent(), undefined);
    expect(info).toMatchObject({ ok: true, value: { host: 'electron', appVersion: '0.0.0-test', projectPath: path.join(dir, 'project') } });
    const summary = await fake.ipcMain.handlers.get('project.summary')!(ownEvent(), undefined);
    expect(summary.ok).toBe(true);
  });

  it('ignores IPC from any other sender: another window, a subframe, a foreign page', async () => {
    const other = new fake.FakeWebContents();
    const subframe = new fake.FakeWebFrame('app://plateau/index.html', window.webContents.mainFrame);
    const foreign = new fake.FakeWebFrame('https://example.org/');
    const before = logged.length;
    for (const event of [
      { sender: other, senderFrame: other.mainFrame },
      { sender: window.webContents, senderFrame: subframe },
      { sender: window.webContents, senderFrame: foreign },
      { sender: window.webContents, senderFrame: null },
    ]) {
      expect(await fake.ipcMain.handlers.get('app.info')!(event, undefined)).toBeUndefined();
      expect(await fake.ipcMain.handlers.get('host.saveFile')!(event, { fileName: 'x', bytesBase64: '' })).toBeUndefined();
    }
    expect(logged.slice(before).filter((l) => l.startsWith('ignored IPC'))).toHaveLength(8);
  });

  it('refuses malformed payloads from the window with usage errors, before the services', async () => {
    for (const [channel, payload] of [
      ['queue.cancel', { jobId: 7 }],
      ['app.info', { extra: 1 }],
      ['models.save', JSON.parse('{"name":"m","spec":{"__proto__":{"x":1}}}')],
      ['report.pdf', { html: 5 }],
      ['host.saveFile', { fileName: 'a', bytesBase64: '***' }],
      ['host.openFile', { filters: [{ name: 'x', extensions: ['../sh'] }] }],
    ] as const) {
      const reply = await fake.ipcMain.handlers.get(channel)!(ownEvent(), payload);
      expect(reply, channel).toMatchObject({ ok: false, error: { kind: 'usage' } });
    }
  });

  it('prints a report to PDF in a hidden script-less window', async () => {
    const reply = await fake.ipcMain.handlers.get('report.pdf')!(ownEvent(), { html: '<h1>Report</h1>' });
    expect(reply.ok).toBe(true);
    expect(Buffer.from(reply.value.bytesBase64, 'base64').toString()).toBe('%PDF-fake');
    expect(reply.value.fileName).toMatch(/^plateau-report-.*\.pdf$/);
    const printer = fake.BrowserWindow.instances[1];
    expect(printer.options).toMatchObject({ show: false, webPreferences: { javascript: false, sandbox: true } });
    expect(printer.loadedUrl).toMatch(/^app:\/\/print\//);
    expect(printer.destroyed).toBe(true);
  });

  it('sends events and menu commands to the app window only', async () => {
    window.webContents.sent.length = 0;
    await fake.ipcMain.handlers.get('queue.list')!(ownEvent(), undefined);
    const help = fake.Menu.current!.template.find((m: any) => m.role === 'help');
    const verify = help.submenu.find((i: any) => i.label === 'Verify this installation');
    verify.click();
    expect(window.webContents.sent).toContainEqual({ channel: EVENT_CHANNEL, message: { event: 'menu', payload: { command: 'verify-installation' } } });
    const roles = fake.Menu.current!.template.map((m: any) => m.role ?? m.label);
    expect(roles).toEqual(expect.arrayContaining(['editMenu', 'windowMenu', 'help', 'File', 'View']));
  });

  it('a second launch brings the window to the front', () => {
    const focus = vi.spyOn(window, 'focus');
    fake.app.emit('second-instance');
    expect(focus).toHaveBeenCalled();
  });
});
