/**
 * Seeded, named random streams. One root seed gives any number of independent streams named by
 * a path (e.g. 'saem', 'subject', 12, 'chain', 3): a stream depends only on the seed and its
 * path, never on how many other streams exist or the order they are drawn from, so a fit is
 * bit-identical however the work is split across threads or workers.
 * Generator: R. P. Brent's xorgens 4096-bit xor-shift with a Weyl sequence (seedrandom's xor4096),
 * seeded with the text of the root seed and the path. seedrandom seeds it; the draws run on a copy
 * of its state in an Int32Array (the same sequence, bit for bit: tests/unit/rng/streams.test.ts),
 * because the fit draws tens of millions of deviates and seedrandom keeps its state in a plain
 * array behind two closures.
 */
import seedrandom from 'seedrandom';

export type StreamPathPart = string | number;

export interface RngStream {
  /** The stream's path, as text (for logs and audit). */
  readonly path: string;
  /** Uniform on the open interval (0, 1), 53-bit resolution; never exactly 0 or 1. */
  uniform(): number;
  /** Standard normal deviate (Marsaglia's polar method; exact in distribution). */
  normal(): number;
  /** Fill `out` with standard normal deviates. */
  fillNormal(out: Float64Array): void;
  /** Fill `out` with uniforms on (0, 1). */
  fillUniform(out: Float64Array): void;
  /** Uniform integer in [0, n), n a positive integer below 2^32 (rejection, no modulo bias). */
  int(n: number): number;
  /** Standard exponential deviate (mean 1). */
  exponential(): number;
  /** A stream further down this one's path (independent of this stream's draws). */
  stream(...path: StreamPathPart[]): RngStream;
}

export interface RngRoot {
  /** The root seed, as text. */
  readonly seed: string;
  stream(...path: StreamPathPart[]): RngStream;
}

function encodePath(path: readonly StreamPathPart[]): string {
  return path
    .map((p) => {
      if (typeof p === 'number') {
        if (!Number.isFinite(p)) throw new RangeError(`random stream path part must be a finite number or text, got ${p}`);
        return `#${p}`;
      }
      if (typeof p !== 'string') throw new TypeError('random stream path parts must be numbers or text');
      return `$${p.replace(/[\\/]/g, (c) => `\\${c}`)}`;
    })
    .join('/');
}

/** Golden-ratio Weyl increment of xorgens (as a signed 32-bit integer). */
const WEYL = 0x61c88647;
const TWO_POW_32 = 0x100000000;
const TWO_POW_21 = 1 << 21;

class Stream implements RngStream {
  readonly path: string;
  private readonly x: Int32Array;
  private i: number;
  private w: number;
  private spare = 0;
  private hasSpare = false;
  private readonly rootKey: string;
  private readonly parts: readonly StreamPathPart[];

  constructor(rootKey: string, parts: readonly StreamPathPart[]) {
    this.rootKey = rootKey;
    this.parts = parts;
    this.path = encodePath(parts);
    // The generator's own string seeding mixes every character into its 4096-bit state and
    // discards the first 512 outputs, so nearby paths give unrelated sequences.
    const seeded = seedrandom.xor4096(`plateau-rng-v1\u0000${rootKey}\u0000${this.path}`, { state: true }).state();
    this.x = Int32Array.from(seeded.X);
    this.i = seeded.i;
    this.w = seeded.w;
  }

  /** One 32-bit output of xorgens (signed). */
  private int32(): number {
    const x = this.x;
    let i = this.i;
    const w = (this.w = (this.w + WEYL) | 0);
    let v = x[(i + 34) & 127];
    i = (i + 1) & 127;
    let t = x[i];
    v ^= v << 13;
    t ^= t << 17;
    v ^= v >>> 15;
    t ^= t >>> 12;
    v = x[i] = v ^ t;
    this.i = i;
    return (v + (w ^ (w >>> 16))) | 0;
  }

  /** 53-bit uniform on (0, 1): seedrandom's double() on the same outputs. */
  private next(): number {
    let r: number;
    do {
      const top = this.int32() >>> 11;
      const bot = (this.int32() >>> 0) / TWO_POW_32;
      r = (top + bot) / TWO_POW_21;
    } while (r === 0);
    return r;
  }

  uniform(): number {
    return this.next();
  }

  normal(): number {
    if (this.hasSpare) {
      this.hasSpare = false;
      return this.spare;
    }
    let u: number;
    let v: number;
    let s: number;
    do {
      u = 2 * this.next() - 1;
      v = 2 * this.next() - 1;
      s = u * u + v * v;
    } while (s >= 1 || s === 0);
    const f = Math.sqrt((-2 * Math.log(s)) / s);
    this.spare = v * f;
    this.hasSpare = true;
    return u * f;
  }

  fillNormal(out: Float64Array): void {
    for (let i = 0; i < out.length; i++) out[i] = this.normal();
  }

  fillUniform(out: Float64Array): void {
    for (let i = 0; i < out.length; i++) out[i] = this.next();
  }

  int(n: number): number {
    if (!(Number.isInteger(n) && n > 0 && n <= 0x100000000)) throw new RangeError(`int(n) needs an integer 1 <= n <= 2^32, got ${n}`);
    // Exact: next() is k/2^53 with k uniform, so floor(u * n) is uniform up to 2^-53 n bias; reject the ragged top.
    const limit = Math.floor(9007199254740992 / n) * n;
    for (;;) {
      const k = this.next() * 9007199254740992;
      if (k < limit) return k % n;
    }
  }

  exponential(): number {
    return -Math.log(this.next());
  }

  stream(...path: StreamPathPart[]): RngStream {
    return new Stream(this.rootKey, [...this.parts, ...path]);
  }
}

/**
 * The root of a run's random streams. `seed` is an integer or any non-empty text; the same seed
 * always gives the same streams.
 */
export function createStreams(seed: number | string): RngRoot {
  let key: string;
  if (typeof seed === 'number') {
    if (!Number.isSafeInteger(seed)) throw new RangeError(`the random seed must be a whole number (got ${seed})`);
    key = `n${seed}`;
  } else if (typeof seed === 'string' && seed.length > 0) {
    key = `s${seed}`;
  } else {
    throw new RangeError('the random seed must be a whole number or non-empty text');
  }
  return {
    seed: String(seed),
    stream: (...path: StreamPathPart[]) => new Stream(key, path),
  };
}
