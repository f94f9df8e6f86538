/**
 * What the report says about where it ran: the machine, the versions, and a fingerprint of the
 * installed engine files that anyone can recompute with standard tools.
 */
import { existsSync, promises as fs, readFileSync } from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';
import { sha256 } from './suite.js';
import type { EngineFingerprint, MachineInfo } from './types.js';

const here = path.dirname(fileURLToPath(import.meta.url));

export function machineInfo(): MachineInfo {
  const cpus = os.cpus();
  return {
    os: `${os.type()} ${os.release()}${typeof os.version === 'function' ? ` (${os.version()})` : ''}`,
    platform: process.platform,
    release: os.release(),
    arch: process.arch,
    hostname: os.hostname(),
    cpuModel: cpus[0]?.model?.trim() || 'unknown',
    cores: cpus.length,
    memoryGiB: Math.round((os.totalmem() / 2 ** 30) * 10) / 10,
    node: process.version,
  };
}

/** The application version from the installation's package.json (walking up from here). */
export function appVersion(): string {
  let dir = here;
  for (let i = 0; i < 8; i++) {
    const file = path.join(dir, 'package.json');
    if (existsSync(file)) {
      try {
        const pkg = JSON.parse(readFileSync(file, 'utf8')) as { name?: string; version?: string };
        if (pkg.name === 'plateau' && typeof pkg.version === 'string') return pkg.version;
      } catch {
        // keep walking: a damaged package.json is reported as unknown below
      }
    }
    const up = path.dirname(dir);
    if (up === dir) break;
    dir = up;
  }
  return 'unknown';
}

async function listFiles(dir: string, ext: string, prefix = '.'): Promise<string[]> {
  const out: string[] = [];
  for (const entry of await fs.readdir(dir, { withFileTypes: true })) {
    const rel = `${prefix}/${entry.name}`;
    if (entry.isDirectory()) out.push(...(await listFiles(path.join(dir, entry.name), ext, rel)));
    else if (entry.isFile() && entry.name.endsWith(ext) && !entry.name.endsWith('.d.ts') && !entry.name.endsWith(`.test${ext}`)) out.push(rel);
  }
  return out;
}

/** Byte order, as `LC_ALL=C sort` orders the paths. */
const byteOrder = (a: string, b: string): number => Buffer.compare(Buffer.from(a), Buffer.from(b));

/**
 * SHA-256 over the engine files that this run imported: the text `sha256sum` prints for each
 * file (hash, two spaces, ./relative/path, newline) in byte order of the path, hashed again.
 * From the installed build that is dist/engine/**.js; from the source tree engine/**.ts.
 */
export async function engineFingerprint(engineDir = path.resolve(here, '..', '..', 'engine')): Promise<EngineFingerprint> {
  const fromSource = !existsSync(path.join(engineDir, 'version.js'));
  const ext = fromSource ? '.ts' : '.js';
  const files = (await listFiles(engineDir, ext)).sort(byteOrder);
  let listing = '';
  for (const rel of files) listing += `${sha256(await fs.readFile(path.join(engineDir, rel)))}  ${rel}\n`;
  return {
    directory: engineDir,
    pattern: fromSource ? 'engine/**/*.ts (run from the source tree; test files excluded)' : 'engine/**/*.js of the installed build',
    fileCount: files.length,
    sha256: sha256(listing),
    recompute: `cd "${engineDir}" && find . -type f -name '*${ext}'${fromSource ? " ! -name '*.test.ts' ! -name '*.d.ts'" : ''} | LC_ALL=C sort | xargs sha256sum | sha256sum`,
  };
}
