/**
 * Checks at the renderer -> main boundary: envelope, channel, plain-data guard, payload schema.
 * Every rejection is an ErrorValue of kind 'usage' with the reason; nothing here throws.
 */
import type { z } from 'zod';
import { guardPlainData, RENDERER_LIMITS, type GuardLimits } from './guard.js';
import { usageErrorFromZod } from './errors.js';
import { isChannel, REQUEST_SCHEMAS, type Channel, type RequestOf } from './schemas.js';
import type { ErrorValue } from './bridge.js';

export type Checked<C extends Channel = Channel> = { ok: true; channel: C; payload: RequestOf<C> } | { ok: false; error: ErrorValue };

/** Validate one request for `channel`: a known channel, plain data within limits, its schema. */
export function validateRequest(channel: unknown, payload: unknown, limits: Readonly<GuardLimits> = RENDERER_LIMITS): Checked {
  if (!isChannel(channel)) return { ok: false, error: { kind: 'usage', message: `unknown channel ${JSON.stringify(String(channel).slice(0, 100))}`, problems: [] } };
  const why = guardPlainData(payload, limits);
  if (why !== undefined) return { ok: false, error: { kind: 'usage', message: `${channel}: ${why}`, problems: [why] } };
  const schema = REQUEST_SCHEMAS[channel] as z.ZodType;
  const r = schema.safeParse(payload);
  if (!r.success) return { ok: false, error: usageErrorFromZod(channel, r.error) };
  return { ok: true, channel, payload: r.data as RequestOf<typeof channel> };
}
