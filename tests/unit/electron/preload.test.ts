/**
 * The compiled preload (dist/main/electron/preload.cjs), run as Electron's sandbox runs it: a
 * CommonJS script whose `require` knows only 'electron' (here the shared fake). Checks that window.plateau has one named method per
 * protocol channel (the same table as main/protocol/bridge.ts), refuses unknown channels and
 * events without touching IPC, and subscriptions end with their AbortSignal.
 */
import { readFileSync } from 'node:fs';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';
import { describe, expect, it, vi } from 'vitest';
import { BRIDGE_METHODS, EVENT_NAMES } from '../../../main/protocol/index.js';
// @ts-expect-error plain JavaScript build helper
import { buildMain, distIsStale } from '../../../build/run-built.mjs';

// ipc.ts and dialogs.ts (for their channel names) import electron too.
vi.mock('electron', () => import('./fakeElectron.js'));
const fake = await import('./fakeElectron.js');

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '../../..');
if (distIsStale()) buildMain();
const code = readFileSync(path.join(root, 'dist/main/electron/preload.cjs'), 'utf8');
const sandboxRequire = (name: string) => {
  if (name === 'electron') return fake;
  throw new Error(`the sandboxed preload cannot require ${name}`);
};
const module = { exports: {} as Record<string, any> };
new Function('require', 'module', 'exports', code)(sandboxRequire, module, module.exports);
const preload = module.exports;
const { EVENT_CHANNEL } = await import('../../../main/electron/ipc.js');
const { OPEN_FILE_CHANNEL, SAVE_FILE_CHANNEL } = await import('../../../main/electron/dialogs.js');

const plateau = (globalThis as unknown as { plateau: Record<string, any> }).plateau;

describe('preload bridge', () => {
  it('has the protocol method table, the host methods and the events', () => {
    expect({ ...preload.PRELOAD_METHODS }).toEqual({ ...BRIDGE_METHODS });
    expect({ ...preload.PRELOAD_HOST_METHODS }).toEqual({ openFile: OPEN_FILE_CHANNEL, saveFile: SAVE_FILE_CHANNEL });
    for (const e of EVENT_NAMES) expect(preload.PRELOAD_EVENTS).toContain(e);
  });

  it('defines a frozen, non-writable window.plateau with named methods only', () => {
    expect(Object.isFrozen(plateau)).toBe(true);
    expect(Object.getOwnPropertyDescriptor(globalThis, 'plateau')!.writable).toBe(false);
    expect(Object.keys(plateau).sort()).toEqual([...Object.keys(BRIDGE_METHODS), 'openFile', 'saveFile', 'invoke', 'subscribe'].sort());
    expect(plateau.ipcRenderer).toBeUndefined();
  });

  it('named methods and invoke call their channel; unknown channels never reach IPC', async () => {
    fake.ipcRenderer.invoked.length = 0;
    await plateau.appInfo();
    await plateau.queueCancel({ jobId: 'j1' });
    await plateau.invoke('fits.get', { fitId: 'f1' });
    await plateau.saveFile({ fileName: 'a.xlsx', bytesBase64: '' });
    expect(fake.ipcRenderer.invoked).toEqual([
      { channel: 'app.info', payload: undefined },
      { channel: 'queue.cancel', payload: { jobId: 'j1' } },
      { channel: 'fits.get', payload: { fitId: 'f1' } },
      { channel: 'host.saveFile', payload: { fileName: 'a.xlsx', bytesBase64: '' } },
    ]);
    const refused = await plateau.invoke('plateau:event', {});
    expect(refused).toMatchObject({ ok: false, error: { kind: 'usage' } });
    expect(await plateau.invoke('__proto__', {})).toMatchObject({ ok: false });
    expect(fake.ipcRenderer.invoked).toHaveLength(4);
  });

  it('subscribe delivers its event only, until the signal aborts', () => {
    const got: unknown[] = [];
    const controller = new AbortController();
    plateau.subscribe('progress', (p: unknown) => got.push(p), controller.signal);
    fake.ipcRenderer.emit(EVENT_CHANNEL, {}, { event: 'progress', payload: { iteration: 1 } });
    fake.ipcRenderer.emit(EVENT_CHANNEL, {}, { event: 'queue', payload: { jobs: [] } });
    expect(got).toEqual([{ iteration: 1 }]);
    controller.abort();
    fake.ipcRenderer.emit(EVENT_CHANNEL, {}, { event: 'progress', payload: { iteration: 2 } });
    expect(got).toEqual([{ iteration: 1 }]);
    expect(fake.ipcRenderer.listenerCount(EVENT_CHANNEL)).toBe(0);
  });

  it('subscribe needs a signal and a known event; an aborted signal subscribes nothing', () => {
    expect(() => plateau.subscribe('progress', () => {})).toThrow(/AbortSignal/);
    expect(() => plateau.subscribe('no-such-event', () => {}, new AbortController().signal)).toThrow(/unknown event/);
    plateau.subscribe('queue', () => {}, AbortSignal.abort());
    expect(fake.ipcRenderer.listenerCount(EVENT_CHANNEL)).toBe(0);
  });
});
