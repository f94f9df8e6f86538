/**
 * The bridge protocol over one WebSocket: requests `{id, channel, payload}` answered by
 * `{id, ok: true, value}` or `{id, ok: false, error}`, and events `{event, payload}` pushed as
 * the services emit them. Malformed, oversized or unknown messages are answered with an
 * ErrorValue of kind 'usage' and logged; the connection and the host go on.
 */
import type { WebSocket, RawData } from 'ws';
import type { ErrorValue } from '../services/serviceError.js';
import type { BridgeBackend } from './backend.js';

/** Largest message accepted (a 50 MB spreadsheet in base64 plus the envelope). */
export const MAX_MESSAGE_BYTES = 72 * 1024 * 1024;
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
