/**
 * What a host (web host or Electron) needs from the application services: parse an incoming
 * request envelope, answer it with a value (never an exception), and a stream of events.
 */
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
