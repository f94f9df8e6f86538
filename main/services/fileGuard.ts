/**
 * One loader limit for every command and the app (issue 11, "unbounded reads"): a path is read
 * only when it is a regular file (not a device such as /dev/zero, a FIFO, a socket or a folder)
 * and its size is within the limit, checked on the open handle before reading, and re-checked
 * while reading so a file that grows cannot push past it. docs/architecture.md, "Input limits".
 */
import { constants, promises as fs } from 'node:fs';
import { ServiceError } from './serviceError.js';

/** Largest input file (datasets, spreadsheets, JSON documents), bytes. */
export const MAX_INPUT_BYTES = 50 * 1024 * 1024;
/** Largest JSON document a user writes or edits (model spec, patient, target, mapping). */
export const MAX_JSON_BYTES = 50 * 1024 * 1024;
/**
 * Largest fit record (fit.json, a project's fit): Plateau must read back what it writes, and a
 * record grows with the patients (about 4 KB each on sparse TDM data: individual estimates and
 * draws, per-level diagnostics), so 12,000 patients write about 50 MB. 512 MiB covers
 * a fit of the largest dataset file (MAX_INPUT_BYTES) and stays under V8's longest string.
 */
export const MAX_FIT_RECORD_BYTES = 512 * 1024 * 1024;

export interface ReadLimits {
  maxBytes?: number;
  /** What the file is, for messages ("data file", "model spec"). */
  what?: string;
}

const mb = (n: number) => `${(n / 1048576).toFixed(n < 1048576 ? 2 : 0)} MB`;

/**
 * Read a regular file within a size limit. Opens without following into a FIFO's blocking open
 * (O_NONBLOCK), checks the kind and size with fstat on that same handle (no race between check
 * and read), then reads at most maxBytes + 1 bytes.
 */
export async function readRegularFile(file: string, limits: ReadLimits = {}): Promise<Buffer> {
  const maxBytes = limits.maxBytes ?? MAX_INPUT_BYTES;
  const what = limits.what ?? 'file';
  let handle: fs.FileHandle;
  try {
    handle = await fs.open(file, constants.O_RDONLY | (constants.O_NONBLOCK ?? 0));
  } catch (e) {
    const code = (e as NodeJS.ErrnoException).code;
    if (code === 'ENOENT') throw new ServiceError('file', `${/file$/.test(what) ? what : 'file'} not found: ${file}`);
    if (code === 'EISDIR') throw new ServiceError('file', `${file} is a folder, not a ${what}`);
    if (code === 'EACCES' || code === 'EPERM') throw new ServiceError('file', `no permission to read ${file}`);
    throw new ServiceError('file', `cannot open ${file}: ${(e as Error).message}`);
  }
  try {
    const st = await handle.stat();
    if (st.isDirectory()) throw new ServiceError('file', `${file} is a folder, not a ${what}`);
    if (!st.isFile()) {
      const kind = st.isFIFO() ? 'a pipe (FIFO)' : st.isCharacterDevice() || st.isBlockDevice() ? 'a device' : st.isSocket() ? 'a socket' : 'not a regular file';
      throw new ServiceError('file', `${file} is ${kind}, not a regular file: save the ${what} to a file and give that path`);
    }
    if (st.size > maxBytes) throw new ServiceError('file', `${file} is ${mb(st.size)}, above the limit of ${mb(maxBytes)} for a ${what}: use a smaller file`);
    const chunks: Buffer[] = [];
    let total = 0;
    const buf = Buffer.allocUnsafe(Math.min(maxBytes + 1, 1 << 20));
    for (;;) {
      const { bytesRead } = await handle.read(buf, 0, Math.min(buf.length, maxBytes + 1 - total), null);
      if (bytesRead === 0) break;
      chunks.push(Buffer.from(buf.subarray(0, bytesRead)));
      total += bytesRead;
      if (total > maxBytes) throw new ServiceError('file', `${file} grew above the limit of ${mb(maxBytes)} for a ${what} while it was read`);
    }
    return Buffer.concat(chunks, total);
  } finally {
    await handle.close().catch(() => undefined);
  }
}

/** As readRegularFile, decoded as UTF-8 (a leading byte-order mark is kept for the caller to strip). */
export async function readRegularTextFile(file: string, limits: ReadLimits = {}): Promise<string> {
  return (await readRegularFile(file, limits)).toString('utf8');
}
