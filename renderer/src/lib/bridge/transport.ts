/**
 * The bridge's wire format and the WebSocket transport used in the web host: requests
 * `{id, channel, payload}`, answers `{id, ok, value | error}`, events `{event, payload}`.
 * The transport knows nothing of channel shapes: the main side validates every payload.
 */

/** The serialisable error every service answers with (kind, message, problems). */
export interface BridgeErrorValue {
  kind: string;
  message: string;
  problems?: unknown[];
}

/** An error answered by the main side, kept whole so views can list its problems. */
export class BridgeError extends Error {
  readonly kind: string;
  readonly problems: unknown[];
  constructor(value: BridgeErrorValue, channel: string) {
    super(value.message || `the request ${channel} failed (${value.kind})`);
    this.name = 'BridgeError';
    this.kind = value.kind;
    this.problems = Array.isArray(value.problems) ? value.problems : [];
  }
}

export type EventListener = (payload: unknown) => void;

/** What every bridge implementation offers the views: one request call and event subscriptions. */
export interface Transport {
  request(channel: string, payload: unknown): Promise<unknown>;
  /** Subscribe to an event; the returned function unsubscribes. */
  subscribe(event: string, listener: EventListener): () => void;
  /** 'electron' or 'web'; for messages that differ by host (saving files, printing). */
  readonly host: 'electron' | 'web';
  /** Connection state of the web transport ('open' for Electron). */
  readonly state: () => 'connecting' | 'open' | 'closed';
}

/** The access token the web host put in the page address (?token=) or in a cookie. */
export function tokenFromPage(loc: Pick<Location, 'search' | 'hash'>, cookie: string): string | undefined {
  const fromQuery = new URLSearchParams(loc.search).get('token');
  if (fromQuery) return fromQuery;
  const fromHash = new URLSearchParams(loc.hash.replace(/^#/, '')).get('token');
  if (fromHash) return fromHash;
  for (const part of cookie.split(';')) {
    const [k, ...v] = part.trim().split('=');
    if (k === 'plateau_token' || k === 'token') return decodeURIComponent(v.join('='));
  }
  return undefined;
}

interface Pending {
  resolve: (v: unknown) => void;
  reject: (e: Error) => void;
  channel: string;
}

/**
 * WebSocket transport to the loopback web host. Requests made before the socket opens wait for
 * it; when the socket closes every pending request fails with a message saying what to do.
 */
export function createWebSocketTransport(url: string, WS: typeof WebSocket = WebSocket): Transport {
  let socket: WebSocket | null = null;
  let state: 'connecting' | 'open' | 'closed' = 'connecting';
  let counter = 0;
  const pending = new Map<string, Pending>();
  const listeners = new Map<string, Set<EventListener>>();
  let opened: Promise<WebSocket>;

  const connect = (): Promise<WebSocket> =>
    new Promise((resolve, reject) => {
      state = 'connecting';
      const ws = new WS(url);
      socket = ws;
      ws.addEventListener('open', () => {
        state = 'open';
        resolve(ws);
      });
      ws.addEventListener('message', (ev) => onMessage(String(ev.data)));
      ws.addEventListener('close', () => {
        state = 'closed';
        const err = new Error('the connection to Plateau closed: is Plateau still running? Restart it and reload this page');
        for (const p of pending.values()) p.reject(err);
        pending.clear();
        reject(err);
        for (const l of listeners.get('connection') ?? []) l({ state: 'closed' });
      });
    });

  function onMessage(text: string): void {
    let msg: unknown;
    try {
      msg = JSON.parse(text);
    } catch {
      console.warn('bridge: ignored a message that is not JSON');
      return;
    }
    if (!msg || typeof msg !== 'object') return;
    const m = msg as Record<string, unknown>;
    if (typeof m.event === 'string') {
      for (const l of listeners.get(m.event) ?? []) l(m.payload);
      return;
    }
    if (typeof m.id !== 'string') return;
    const p = pending.get(m.id);
    if (!p) return;
    pending.delete(m.id);
    if (m.ok === true) p.resolve(m.value);
    else p.reject(new BridgeError((m.error as BridgeErrorValue) ?? { kind: 'internal', message: '' }, p.channel));
  }

  opened = connect();
  opened.catch(() => undefined);

  return {
    host: 'web',
    state: () => state,
    async request(channel, payload) {
      const ws = state === 'open' && socket ? socket : await opened;
      const id = `r${++counter}`;
      return new Promise((resolve, reject) => {
        pending.set(id, { resolve, reject, channel });
        ws.send(JSON.stringify({ id, channel, payload: payload ?? {} }));
      });
    },
    subscribe(event, listener) {
      let set = listeners.get(event);
      if (!set) listeners.set(event, (set = new Set()));
      set.add(listener);
      return () => set.delete(listener);
    },
  };
}
