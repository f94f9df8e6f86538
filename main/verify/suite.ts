/**
 * Finds and reads the shipped validation set (resources/validation): suite.json and the
 * reference files it names. Every file read is hashed, so the report can list exactly which
 * reference values the run compared against.
 */
import { createHash } from 'node:crypto';
import { existsSync, promises as fs } from 'node:fs';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';
import type { CheckSpec, SuiteSpec } from './types.js';

export class VerifySetupError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'VerifySetupError';
  }
}

/** resources/validation of the installation, found by walking up from this module. */
export function validationDir(): string {
  let dir = path.dirname(fileURLToPath(import.meta.url));
  for (let i = 0; i < 8; i++) {
    const candidate = path.join(dir, 'resources', 'validation');
    if (existsSync(path.join(candidate, 'suite.json'))) return candidate;
    const up = path.dirname(dir);
    if (up === dir) break;
    dir = up;
  }
  throw new VerifySetupError('cannot find resources/validation/suite.json next to the installed program: the installation is incomplete; reinstall Plateau');
}

export const sha256 = (data: string | Uint8Array): string => createHash('sha256').update(data).digest('hex');

/** Reads files of the validation folder once each and remembers their SHA-256. */
export class ValidationFiles {
  readonly dir: string;
  private readonly bytes = new Map<string, Uint8Array>();
  private readonly json = new Map<string, unknown>();

  constructor(dir: string) {
    this.dir = dir;
  }

  async readBytes(rel: string): Promise<Uint8Array> {
    const have = this.bytes.get(rel);
    if (have) return have;
    const file = path.join(this.dir, rel);
    let data: Uint8Array;
    try {
      data = new Uint8Array(await fs.readFile(file));
    } catch (e) {
      throw new VerifySetupError(`cannot read the reference file ${file} (${(e as NodeJS.ErrnoException).code ?? (e as Error).message}): the installation is incomplete; reinstall Plateau`);
    }
    this.bytes.set(rel, data);
    return data;
  }

  async readText(rel: string): Promise<string> {
    return new TextDecoder().decode(await this.readBytes(rel));
  }

  async readJson<T = any>(rel: string): Promise<T> {
    if (this.json.has(rel)) return this.json.get(rel) as T;
    const text = await this.readText(rel);
    let value: unknown;
    try {
      value = JSON.parse(text);
    } catch (e) {
      throw new VerifySetupError(`the reference file ${path.join(this.dir, rel)} is not valid JSON (${(e as Error).message}): the installation is damaged; reinstall Plateau`);
    }
    this.json.set(rel, value);
    return value as T;
  }

  /** SHA-256 of a file read so far (null when it was never read). */
  hashOf(rel: string): string | null {
    const b = this.bytes.get(rel);
    return b ? sha256(b) : null;
  }

  /** Every file read, sorted, with its SHA-256. */
  readFiles(): { path: string; sha256: string }[] {
    return [...this.bytes.keys()].sort().map((p) => ({ path: p, sha256: sha256(this.bytes.get(p)!) }));
  }
}

const KNOWN = new Set(['id', 'part', 'kind', 'title', 'purpose', 'source', 'reference', 'tolerance', 'quick']);

/** suite.json, checked enough that a damaged file fails with a clear message instead of a crash. */
export async function loadSuite(files: ValidationFiles): Promise<SuiteSpec> {
  const suite = await files.readJson<SuiteSpec>('suite.json');
  const where = path.join(files.dir, 'suite.json');
  if (!suite || !Array.isArray(suite.checks) || typeof suite.title !== 'string' || typeof suite.datasets !== 'object') throw new VerifySetupError(`${where} has no "checks" list or "datasets": the installation is damaged; reinstall Plateau`);
  const ids = new Set<string>();
  suite.checks.forEach((c: CheckSpec, i) => {
    for (const k of KNOWN) if (!(k in c)) throw new VerifySetupError(`${where}: checks[${i}] has no "${k}"`);
    if (ids.has(c.id)) throw new VerifySetupError(`${where}: the check id "${c.id}" appears twice`);
    ids.add(c.id);
  });
  return suite;
}
