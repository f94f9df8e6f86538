/**
 * The IPC gatekeeper: each bridge channel is answered only for the app's own window (its
 * webContents, its main frame, on the app:// origin); anything else is ignored and logged.
 * Protocol channels are checked by the protocol schemas before the services see them; a few
 * channels are answered by the host itself (dialogs, PDF).
 */
import { ipcMain, type IpcMainInvokeEvent, type WebContents } from 'electron';
import type { BridgeBackend, BridgeReply } from '../webhost/backend.js';
import { isAppUrl, type Log } from './security.js';

/** main -> renderer events travel on this one channel as `{event, payload}`. */
export const EVENT_CHANNEL = 'plateau:event';

export type HostHandler = (payload: unknown) => Promise<BridgeReply>;

/** True only for the main frame of the app's window showing an app:// page. */
export function isOwnWindow(event: IpcMainInvokeEvent, contents: WebContents | undefined): boolean {
  if (!contents || contents.isDestroyed()) return false;
  if (event.sender.id !== contents.id) return false;
  const frame = event.senderFrame;
  if (!frame || frame.parent !== null) return false;
  return isAppUrl(frame.url);
}

export interface IpcOptions {
  /** The protocol's channel names, answered by the services. */
  channels: readonly string[];
  backend: BridgeBackend;
  /** Channels the host answers itself (host-only ones, or protocol ones it overrides). */
  hostHandlers: ReadonlyMap<string, HostHandler>;
  /** The app window's web contents (undefined before it exists or after it closed). */
  windowContents: () => WebContents | undefined;
  log: Log;
}

let nextRequest = 0;

/** Registers every channel; returns the function that removes them. */
export function registerIpc(options: IpcOptions): () => void {
  const protocolChannels = new Set(options.channels);
  const all = [...new Set([...options.channels, ...options.hostHandlers.keys()])];
  for (const channel of all) {
    ipcMain.handle(channel, async (event, payload: unknown): Promise<BridgeReply | undefined> => {
      if (!isOwnWindow(event, options.windowContents())) {
        options.log(`ignored IPC ${channel} from an unknown sender (${event.senderFrame?.url.slice(0, 200) ?? 'no frame'})`);
        return undefined;
      }
      if (protocolChannels.has(channel)) {
        const parsed = options.backend.parseRequest({ id: `ipc-${++nextRequest}`, channel, payload });
        if (!parsed.ok) {
          options.log(`refused ${channel}: ${parsed.error.message}`);
          return { ok: false, error: parsed.error };
        }
        payload = parsed.payload;
      }
      const own = options.hostHandlers.get(channel);
      try {
        return own ? await own(payload) : await options.backend.handle(channel, payload);
      } catch (error) {
        options.log(`${channel} failed unexpectedly: ${String(error)}`);
        return { ok: false, error: { kind: 'internal', message: `internal error while answering ${channel}`, problems: [] } };
      }
    });
  }
  return () => {
    for (const channel of all) ipcMain.removeHandler(channel);
  };
}

/** Forwards the services' events to the app window only. */
export function forwardEvents(backend: BridgeBackend, windowContents: () => WebContents | undefined): () => void {
  return backend.subscribe((event, payload) => {
    const contents = windowContents();
    if (contents && !contents.isDestroyed()) contents.send(EVENT_CHANNEL, { event, payload });
  });
}
