/**
 * The one bridge the views talk to: `window.plateau` when the Electron preload exposed it,
 * otherwise a WebSocket to the loopback web host (token from the page address or a cookie).
 * There is no offline stand-in: without a host every request fails with a message.
 */
import type { Channel, EventName, EventPayload, RequestOf, ResponseOf } from '../../../../main/protocol/bridge.js';
import { BridgeError, createWebSocketTransport, tokenFromPage, type EventListener, type Transport } from './transport.js';

export { BridgeError, type Transport } from './transport.js';

/** The part of `PlateauBridge` (main/protocol/bridge.ts) the transport uses. */
interface PreloadApi {
  invoke(channel: string, payload: unknown): Promise<unknown>;
  subscribe(event: string, listener: EventListener, signal: AbortSignal): void;
}

function isPreloadApi(x: unknown): x is PreloadApi {
  return !!x && typeof (x as PreloadApi).invoke === 'function' && typeof (x as PreloadApi).subscribe === 'function';
}

/** The Electron preload answers a Result (`{ok, value} | {ok: false, error}`) like the web host. */
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
      const stop = new AbortController();
      api.subscribe(event, listener, stop.signal);
      return () => stop.abort();
    },
  };
}

let current: Transport | undefined;

/** The bridge for this page (created once). */
export function bridge(): Transport {
  if (current) return current;
  const w = window as unknown as { plateau?: unknown };
  if (isPreloadApi(w.plateau)) current = electronTransport(w.plateau);
  else {
    // The web host puts the token in the first address (?token=) and then in an HttpOnly cookie
    // that the browser sends with the WebSocket request by itself.
    const token = tokenFromPage(window.location, document.cookie);
    const scheme = window.location.protocol === 'https:' ? 'wss' : 'ws';
    current = createWebSocketTransport(`${scheme}://${window.location.host}/ws${token ? `?token=${encodeURIComponent(token)}` : ''}`);
  }
  return current;
}

/** A request on the bridge; resolves with the channel's value, rejects with a BridgeError. */
export function request<C extends Channel>(channel: C, ...payload: undefined extends RequestOf<C> ? [RequestOf<C>?] : [RequestOf<C>]): Promise<ResponseOf<C>> {
  return bridge().request(channel, payload[0] ?? {}) as Promise<ResponseOf<C>>;
}

/** Subscribe to a main-side event (queue, progress, ...); returns the unsubscribe function. */
export function subscribe<E extends EventName>(event: E, listener: (payload: EventPayload<E>) => void): () => void {
  return bridge().subscribe(event, listener as EventListener);
}
