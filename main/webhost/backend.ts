/**
 * What a host (web host or Electron) needs from the application services: parse an incoming
 * request envelope, answer it with a value (never an exception), and a stream of events.
 */
import { RequestEnvelope, usageErrorFromZod, validateRequest } from '../protocol/index.js';
import type { ErrorValue } from '../services/serviceError.js';

export type BridgeReply = { ok: true; value: unknown } | { ok: false; error: ErrorValue };

export type ParsedRequest =
  | { ok: true; id: string; channel: string; payload: unknown }
  | { ok: false; id?: string; error: ErrorValue };

export interface BridgeBackend {
  /** Check a request envelope `{id, channel, payload}` (known channel, size, no prototype keys). */
  parseRequest(message: unknown): ParsedRequest;
  /** Answer one request; failures come back as `{ok: false, error}`. */
  handle(channel: string, payload: unknown): Promise<BridgeReply>;
  /** Every event the services emit (queue, progress, ...); returns the unsubscribe function. */
  subscribe(listener: (event: string, payload: unknown) => void): () => void;
}

/**
 * The envelope and payload checks of the protocol (main/protocol): a strict `{id, channel,
 * payload}`, a known channel, plain data within the size/depth limits without prototype keys,
 * and the channel's schema. Shared by the web host and Electron's IPC gatekeeper.
 */
export function parseBridgeRequest(message: unknown): ParsedRequest {
  const envelope = RequestEnvelope.safeParse(message);
  if (!envelope.success) {
    const raw = message !== null && typeof message === 'object' && !Array.isArray(message) ? (message as { id?: unknown }).id : undefined;
    const id = typeof raw === 'string' && raw.length > 0 && raw.length <= 100 ? raw : undefined;
    return { ok: false, id, error: usageErrorFromZod('request', envelope.error) };
  }
  const checked = validateRequest(envelope.data.channel, envelope.data.payload);
  if (!checked.ok) return { ok: false, id: envelope.data.id, error: checked.error };
  return { ok: true, id: envelope.data.id, channel: checked.channel, payload: checked.payload };
}
