/**
 * The preload of the app window (sandboxed, so CommonJS and self-contained: it may require only
 * 'electron'). It gives the page `window.plateau`, the PlateauBridge of main/protocol/bridge.ts:
 * one named method per channel, `invoke` for a known channel, and `subscribe(event, listener,
 * signal)` that ends when the signal aborts; plus the host's file dialogs. Never raw ipcRenderer.
 *
 * The bridge object is built in the page's own world (contextBridge.executeInMainWorld), because
 * an AbortSignal loses its methods when it crosses the context bridge; only the small `raw`
 * object below crosses, as proxied functions.
 */
import { contextBridge, ipcRenderer, type IpcRendererEvent } from 'electron';

/** Method name -> channel; must equal BRIDGE_METHODS of main/protocol/bridge.ts (a test checks). */
export const PRELOAD_METHODS: Readonly<Record<string, string>> = Object.freeze({
  appInfo: 'app.info',
  appAcknowledgeCaution: 'app.acknowledgeCaution',
  projectSummary: 'project.summary',
  importParse: 'import.parse',
  importRemap: 'import.remap',
  importCancel: 'import.cancel',
  importSaveTemplate: 'import.saveTemplate',
  importTemplates: 'import.templates',
  importAddToProject: 'import.addToProject',
  datasetGet: 'dataset.get',
  modelsCatalogue: 'models.catalogue',
  modelsSave: 'models.save',
  modelsGet: 'models.get',
  queueEnqueue: 'queue.enqueue',
  queueList: 'queue.list',
  queueCancel: 'queue.cancel',
  queueReorder: 'queue.reorder',
  queueRerun: 'queue.rerun',
  fitsGet: 'fits.get',
  fitsExportXlsx: 'fits.exportXlsx',
  dosingTargets: 'dosing.targets',
  dosingLiteratureModels: 'dosing.literatureModels',
  dosingAdvise: 'dosing.advise',
  dosingCancel: 'dosing.cancel',
  dosingSaveSession: 'dosing.saveSession',
  reportPdf: 'report.pdf',
  verifyRun: 'verify.run',
  verifyCancel: 'verify.cancel',
  verifyList: 'verify.list',
  verifyGet: 'verify.get',
});
/** Host methods beyond the protocol (main/electron/dialogs.ts). */
export const PRELOAD_HOST_METHODS: Readonly<Record<string, string>> = Object.freeze({
  openFile: 'host.openFile',
  saveFile: 'host.saveFile',
});
/** Events of the protocol (EVENT_NAMES) and the host's menu commands. */
export const PRELOAD_EVENTS: readonly string[] = Object.freeze(['queue', 'progress', 'verify-progress', 'menu']);
/** Must equal EVENT_CHANNEL of ipc.ts. */
const EVENT_CHANNEL = 'plateau:event';

interface RawBridge {
  invoke(channel: string, payload: unknown): Promise<unknown>;
  on(event: string, listener: (payload: unknown) => void): number;
  off(subscription: number): void;
}

function unknownName(what: string, name: unknown) {
  return { ok: false, error: { kind: 'usage', message: `unknown ${what} ${JSON.stringify(String(name).slice(0, 100))}`, problems: [] } };
}

/** The isolated-world half: the only functions that touch ipcRenderer. */
export function rawBridge(ipc: Pick<typeof ipcRenderer, 'invoke' | 'on' | 'removeListener'>): RawBridge {
  const channels = new Set([...Object.values(PRELOAD_METHODS), ...Object.values(PRELOAD_HOST_METHODS)]);
  const events = new Set(PRELOAD_EVENTS);
  const listeners = new Map<number, (e: IpcRendererEvent, message: unknown) => void>();
  let next = 0;
  return {
    invoke(channel, payload) {
      if (typeof channel !== 'string' || !channels.has(channel)) return Promise.resolve(unknownName('channel', channel));
      return ipc.invoke(channel, payload);
    },
    on(event, listener) {
      if (typeof event !== 'string' || !events.has(event) || typeof listener !== 'function') return -1;
      const id = ++next;
      const handler = (_e: IpcRendererEvent, message: unknown) => {
        const m = message as { event?: unknown; payload?: unknown } | null;
        if (m && m.event === event) listener(m.payload);
      };
      listeners.set(id, handler);
      ipc.on(EVENT_CHANNEL, handler);
      return id;
    },
    off(subscription) {
      const handler = listeners.get(subscription);
      if (handler) {
        ipc.removeListener(EVENT_CHANNEL, handler);
        listeners.delete(subscription);
      }
    },
  };
}

/**
 * The page-world half (runs in the page: self-contained, no closure over this module). Builds
 * the frozen `window.plateau` over `raw`.
 */
export function installInPage(raw: RawBridge, methods: Record<string, string>, hostMethods: Record<string, string>): void {
  const api: Record<string, unknown> = Object.create(null);
  for (const name of Object.keys(methods)) {
    const channel = methods[name];
    api[name] = (payload?: unknown) => raw.invoke(channel, payload);
  }
  for (const name of Object.keys(hostMethods)) {
    const channel = hostMethods[name];
    api[name] = (payload?: unknown) => raw.invoke(channel, payload);
  }
  api.invoke = (channel: string, payload: unknown) => raw.invoke(channel, payload);
  api.subscribe = (event: string, listener: (payload: unknown) => void, signal: AbortSignal) => {
    if (!signal || typeof signal.addEventListener !== 'function') throw new TypeError('plateau.subscribe needs an AbortSignal to end the subscription');
    if (signal.aborted) return;
    const id = raw.on(event, listener);
    if (id < 0) throw new TypeError(`plateau.subscribe: unknown event ${JSON.stringify(String(event))}`);
    signal.addEventListener('abort', () => raw.off(id), { once: true });
  };
  Object.defineProperty(globalThis, 'plateau', { value: Object.freeze(api), writable: false, configurable: false, enumerable: true });
}

contextBridge.executeInMainWorld({ func: installInPage, args: [rawBridge(ipcRenderer), PRELOAD_METHODS, PRELOAD_HOST_METHODS] });
