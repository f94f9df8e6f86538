/**
 * The structural check every message passes before its schema (docs/architecture.md,
 * "Protocol"): plain data only, bounded size and depth, no prototype keys. Runs on untrusted
 * input from the renderer (IPC or WebSocket) and from worker processes, so it never throws and
 * never recurses without a bound. No Node or DOM imports (the renderer may import it).
 */

/** Largest message accepted at the renderer boundary (characters of text, bytes of binary). */
export const MAX_MESSAGE_BYTES = 80 * 1024 * 1024;
/**
 * Largest message accepted from or to a worker: a fit record grows with the patients (about 4 KB
 * each on sparse TDM data), so this is the fit record's file limit (fileGuard.ts
 * MAX_FIT_RECORD_BYTES), not the renderer's.
 */
export const MAX_WORKER_MESSAGE_BYTES = 512 * 1024 * 1024;
/** Deepest nesting of objects and arrays; our records are at most ~8 deep. */
export const MAX_DEPTH = 64;
/** Most object keys plus array items in one message from the renderer. */
export const MAX_NODES = 5_000_000;
/**
 * Most values in one worker message: a fit record holds about 175 values a patient on sparse
 * TDM data (2 BSV parameters, 3 levels; measured) and about 330 with 11 levels, so 25 million
 * cover more patients than the largest dataset file holds; 5 million stopped a fit of 18,000.
 */
export const MAX_WORKER_NODES = 25_000_000;

/** Keys that could reach an object's prototype when merged or assigned naively. */
export const PROTOTYPE_KEYS: ReadonlySet<string> = new Set(['__proto__', 'constructor', 'prototype']);

export interface GuardLimits {
  maxBytes: number;
  maxDepth: number;
  maxNodes: number;
  /** Accept Uint8Array values (structured clone between main and worker); never from the renderer. */
  allowBinary: boolean;
}

export const RENDERER_LIMITS: Readonly<GuardLimits> = Object.freeze({ maxBytes: MAX_MESSAGE_BYTES, maxDepth: MAX_DEPTH, maxNodes: MAX_NODES, allowBinary: false });
export const WORKER_LIMITS: Readonly<GuardLimits> = Object.freeze({ maxBytes: MAX_WORKER_MESSAGE_BYTES, maxDepth: MAX_DEPTH, maxNodes: MAX_WORKER_NODES, allowBinary: true });

/**
 * Why `value` is not acceptable plain data, or undefined when it is. Plain data: null,
 * booleans, finite or non-finite numbers, strings, arrays, and objects whose prototype is
 * Object.prototype or null, with no prototype keys (own keys named __proto__, constructor,
 * prototype), no accessors, within the limits.
 */
export function guardPlainData(value: unknown, limits: Readonly<GuardLimits> = RENDERER_LIMITS): string | undefined {
  let bytes = 0;
  let nodes = 0;
  // Iterative walk: a hostile depth cannot blow the stack before the depth check.
  const stack: { v: unknown; depth: number; path: string }[] = [{ v: value, depth: 0, path: '$' }];
  while (stack.length > 0) {
    const { v, depth, path } = stack.pop()!;
    if (++nodes > limits.maxNodes) return `the message has more than ${limits.maxNodes} values`;
    if (v === null || v === undefined || typeof v === 'boolean') {
      bytes += 4;
    } else if (typeof v === 'number') {
      bytes += 8;
    } else if (typeof v === 'string') {
      bytes += v.length;
    } else if (typeof v === 'object') {
      if (depth >= limits.maxDepth) return `${path}: nested deeper than ${limits.maxDepth} levels`;
      if (v instanceof Uint8Array) {
        if (!limits.allowBinary) return `${path}: binary data is not accepted here (send base64 text)`;
        bytes += v.byteLength;
      } else if (Array.isArray(v)) {
        if (Object.getPrototypeOf(v) !== Array.prototype) return `${path}: not a plain array`;
        for (let i = v.length - 1; i >= 0; i--) stack.push({ v: v[i], depth: depth + 1, path: `${path}[${i}]` });
      } else {
        const proto = Object.getPrototypeOf(v);
        if (proto !== Object.prototype && proto !== null) return `${path}: not a plain object`;
        for (const key of Reflect.ownKeys(v)) {
          if (typeof key !== 'string') return `${path}: symbol keys are not accepted`;
          if (PROTOTYPE_KEYS.has(key)) return `${path}: the key "${key}" is not accepted (prototype key)`;
          const d = Object.getOwnPropertyDescriptor(v, key);
          if (!d || !('value' in d)) return `${path}.${key.slice(0, 40)}: accessors are not accepted`;
          bytes += key.length;
          stack.push({ v: d.value, depth: depth + 1, path: `${path}.${key.slice(0, 40)}` });
        }
      }
    } else {
      return `${path}: a ${typeof v} is not plain data`;
    }
    if (bytes > limits.maxBytes) return `the message is larger than ${(limits.maxBytes / 1048576).toFixed(0)} MB`;
  }
  return undefined;
}
