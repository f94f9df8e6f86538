/**
 * The one bridge the views talk to: `window.plateau` when the Electron preload exposed it,
 * otherwise a WebSocket to the loopback web host (token from the page address or a cookie).
 * There is no offline stand-in: without either, every request fails with a message.
 */
import { BridgeError, createWebSocketTransport, tokenFromPage, type EventListener, type Transport } from './transport.js';

export { BridgeError, type Transport } from './transport.js';

/** The narrow API the Electron preload exposes (one request call, one event subscription). */
interface PreloadApi {
  invoke(channel: string, payload: unknown): Promise<unknown>;
  on(event: string, listener: EventListener): (() => void) | void;
}

function isPreloadApi(x: unknown): x is PreloadApi {
  return !!x && typeof (x as PreloadApi).invoke === 'function' && typeof (x as PreloadApi).on === 'function';
}

/** Electron preload answers `{ok, value} | {ok:false, error}` like the web host, or throws. */
function electronTransport(api: PreloadApi): Transport {
  return {
    host: 'electron',
    state: () => 'open',
    async request(channel, payload) {
      const answer = (await api.invoke(channel, payload ?? {})) as { ok?: boolean; value?: unknown; error?: { kind: string; message: string } };
      if (answer && typeof answer === 'object' && 'ok' in answer) {
        if (answer.ok) return answer.value;
        throw new BridgeError(answer.error ?? { kind: 'internal', message: '' }, channel);
      }
      return answer;
    },
    subscribe(event, listener) {
      const off = api.on(event, listener);
      return typeof off === 'function' ? off : () => undefined;
    },
  };
}

function unavailableTransport(reason: string): Transport {
  return {
    host: 'web',
    state: () => 'closed',
    request: async () => {
      throw new Error(reason);
    },
    subscribe: () => () => undefined,
  };
}

let current: Transport | undefined;

/** The bridge for this page (created once). */
export function bridge(): Transport {
  if (current) return current;
  const w = window as unknown as { plateau?: unknown };
  if (isPreloadApi(w.plateau)) current = electronTransport(w.plateau);
  else {
    const token = tokenFromPage(window.location, document.cookie);
    if (!token)
      current = unavailableTransport('this page was opened without its access token: open Plateau with the address it printed when it started (it ends with ?token=...)');
    else {
      const scheme = window.location.protocol === 'https:' ? 'wss' : 'ws';
      current = createWebSocketTransport(`${scheme}://${window.location.host}/ws?token=${encodeURIComponent(token)}`);
    }
  }
  return current;
}

/** A request on the bridge. */
export function request<T>(channel: string, payload: unknown = {}): Promise<T> {
  return bridge().request(channel, payload) as Promise<T>;
}

/** Subscribe to a main-side event (queue, progress, ...). */
export function subscribe(event: string, listener: EventListener): () => void {
  return bridge().subscribe(event, listener);
}
