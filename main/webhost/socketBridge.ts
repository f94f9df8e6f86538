/**
 * The bridge protocol over one WebSocket: requests `{id, channel, payload}` answered by
 * `{id, ok: true, value}` or `{id, ok: false, error}`, and events `{event, payload}` pushed as
 * the services emit them. Malformed, oversized or unknown messages are answered with an
 * ErrorValue of kind 'usage' and logged; the connection and the host go on.
 */
import type { WebSocket, RawData } from 'ws';
import { MAX_MESSAGE_BYTES as PROTOCOL_MAX_MESSAGE_BYTES, SubscribeEnvelope } from '../protocol/index.js';
import type { ErrorValue } from '../services/serviceError.js';
import type { BridgeBackend } from './backend.js';

/** Largest message accepted: the protocol's limit at the renderer boundary. */
export const MAX_MESSAGE_BYTES = PROTOCOL_MAX_MESSAGE_BYTES;
/** Progress events are dropped (never queue snapshots or replies) while this much is unsent. */
const PROGRESS_BACKLOG_BYTES = 4 * 1024 * 1024;

function usage(message: string): ErrorValue {
  return { kind: 'usage', message, problems: [] };
}

export function attachBridge(socket: WebSocket, backend: BridgeBackend, log: (line: string) => void): void {
  const send = (message: unknown) => {
    if (socket.readyState === socket.OPEN) socket.send(JSON.stringify(message));
  };
  const unsubscribe = backend.subscribe((event, payload) => {
    if (event === 'progress' && socket.bufferedAmount > PROGRESS_BACKLOG_BYTES) return;
    send({ event, payload });
  });
  socket.on('close', unsubscribe);
  socket.on('error', (error) => log(`web host: WebSocket error: ${error.message}`));

  socket.on('message', (data: RawData, isBinary: boolean) => {
    if (isBinary) {
      log('web host: refused a binary WebSocket message');
      send({ id: null, ok: false, error: usage('binary messages are not part of the bridge protocol; send JSON text') });
      return;
    }
    const text = Array.isArray(data) ? Buffer.concat(data).toString('utf8') : Buffer.from(data as ArrayBuffer).toString('utf8');
    let message: unknown;
    try {
      message = JSON.parse(text);
    } catch {
      log('web host: refused a WebSocket message that is not JSON');
      send({ id: null, ok: false, error: usage('the message is not JSON') });
      return;
    }
    // Every event is sent to every socket; a subscription message is acknowledged so a client
    // that announces what it listens to gets an answer.
    if (message !== null && typeof message === 'object' && 'subscribe' in message) {
      const sub = SubscribeEnvelope.safeParse(message);
      if (sub.success) send({ id: sub.data.id, ok: true, value: null });
      else send({ id: null, ok: false, error: usage(`malformed subscription: ${sub.error.issues[0]?.message ?? 'invalid'}`) });
      return;
    }
    const request = backend.parseRequest(message);
    if (!request.ok) {
      log(`web host: refused a request: ${request.error.message}`);
      send({ id: request.id ?? null, ok: false, error: request.error });
      return;
    }
    const { id, channel, payload } = request;
    backend.handle(channel, payload).then(
      (reply) => send({ id, ...reply }),
      (error: unknown) => {
        // handle() answers with values; reaching here is a bug in the host wiring.
        log(`web host: ${channel} failed unexpectedly: ${String(error)}`);
        send({ id, ok: false, error: { kind: 'internal', message: `internal error while answering ${channel}`, problems: [] } });
      },
    );
  });
}
