/** Limits for parsing untrusted spreadsheets in the worker process (all overridable per call). */
import { crc32, inflateRawSync } from 'node:zlib';

/** Largest file accepted (bytes). A 50,000-row two-sheet export is about 2-3 MB as .xlsx. */
export const DEFAULT_MAX_FILE_BYTES = 50 * 1024 * 1024;
/** Wall-clock limit for one parse; the worker is killed when it is exceeded. */
export const DEFAULT_PARSE_TIME_LIMIT_MS = 60_000;
/** V8 heap limit of the worker (--max-old-space-size), so a zip bomb cannot take the machine. */
export const DEFAULT_WORKER_HEAP_MB = 2048;

/** Largest uncompressed size of one zip entry, and of all entries together (zip bombs). */
export const DEFAULT_MAX_ZIP_ENTRY_BYTES = 512 * 1024 * 1024;
export const DEFAULT_MAX_ZIP_TOTAL_BYTES = 1024 * 1024 * 1024;

/**
 * Check a zip container (.xlsx, .ods) before SheetJS sees it: every entry must inflate with
 * Node's zlib to exactly its declared size and CRC-32, within the size limits. SheetJS's own
 * inflate can loop on damaged deflate data, so damaged files are refused here with a clear
 * reason. Returns undefined when the container is sound, else what is wrong. Layout: PKWARE
 * APPNOTE.TXT (end of central directory, central directory, local headers; from memory).
 */
export function checkZipContainer(bytes: Uint8Array, maxEntryBytes = DEFAULT_MAX_ZIP_ENTRY_BYTES, maxTotalBytes = DEFAULT_MAX_ZIP_TOTAL_BYTES): string | undefined {
  const r = inspectZipContainer(bytes, maxEntryBytes, maxTotalBytes);
  return r.ok ? undefined : r.reason;
}

/** As checkZipContainer, and on success the inflated entries by name (for the direct .xlsx reader). */
export function inspectZipContainer(
  bytes: Uint8Array,
  maxEntryBytes = DEFAULT_MAX_ZIP_ENTRY_BYTES,
  maxTotalBytes = DEFAULT_MAX_ZIP_TOTAL_BYTES,
): { ok: true; entries: Map<string, Uint8Array> } | { ok: false; reason: string } {
  const fail = (reason: string) => ({ ok: false as const, reason });
  const entriesOut = new Map<string, Uint8Array>();
  const n = bytes.length;
  const u16 = (o: number) => bytes[o] | (bytes[o + 1] << 8);
  const u32 = (o: number) => (bytes[o] | (bytes[o + 1] << 8) | (bytes[o + 2] << 16) | (bytes[o + 3] << 24)) >>> 0;
  let eocd = -1;
  for (let o = n - 22; o >= Math.max(0, n - 22 - 65_535); o--) {
    if (u32(o) === 0x06054b50) {
      eocd = o;
      break;
    }
  }
  if (eocd < 0) return fail('the zip container has no central directory (the file is truncated or not a zip)');
  const entries = u16(eocd + 10);
  const cdSize = u32(eocd + 12);
  let p = u32(eocd + 16);
  if (p + cdSize > n || entries === 0xffff || p === 0xffffffff) return fail('the zip central directory is damaged or uses ZIP64 (not supported for spreadsheets)');
  let total = 0;
  for (let i = 0; i < entries; i++) {
    if (p + 46 > n || u32(p) !== 0x02014b50) return fail(`zip central directory entry ${i + 1} is damaged`);
    const flags = u16(p + 8);
    const method = u16(p + 10);
    const crc = u32(p + 16);
    const compSize = u32(p + 20);
    const size = u32(p + 24);
    const nameLen = u16(p + 28);
    const extraLen = u16(p + 30);
    const commentLen = u16(p + 32);
    const local = u32(p + 42);
    const fullName = Buffer.from(bytes.buffer, bytes.byteOffset + Math.min(n, p + 46), Math.max(0, Math.min(nameLen, n - p - 46))).toString('utf8');
    const name = fullName.slice(0, 200);
    p += 46 + nameLen + extraLen + commentLen;
    if (flags & 1) return fail('the workbook is password-protected (encrypted): remove the password in the spreadsheet program and export again');
    if (compSize === 0xffffffff || size === 0xffffffff) return fail(`zip entry ${name} uses ZIP64 (not supported for spreadsheets)`);
    if (size > maxEntryBytes) return fail(`zip entry ${name} would unpack to ${(size / 1048576).toFixed(0)} MB, above the limit of ${(maxEntryBytes / 1048576).toFixed(0)} MB`);
    total += size;
    if (total > maxTotalBytes) return fail(`the workbook would unpack to more than ${(maxTotalBytes / 1048576).toFixed(0)} MB`);
    if (local + 30 > n || u32(local) !== 0x04034b50) return fail(`zip entry ${name}: local header is damaged`);
    const start = local + 30 + u16(local + 26) + u16(local + 28);
    if (start + compSize > n) return fail(`zip entry ${name} is cut short (the file is truncated)`);
    const data = bytes.subarray(start, start + compSize);
    let out: Uint8Array;
    if (method === 0) out = data;
    else if (method === 8) {
      try {
        out = inflateRawSync(data, { maxOutputLength: Math.max(1, size) });
      } catch (e) {
        const raw = process.env.PLATEAU_DEBUG === '1' ? ` [debug: ${(e as Error).message}]` : '';
        return fail(`zip entry ${name}: its compressed data is damaged and does not unpack${raw}`);
      }
    } else return fail(`zip entry ${name} uses compression method ${method}, which spreadsheets do not use`);
    if (out.length !== size) return fail(`zip entry ${name} unpacks to ${out.length} bytes, not the ${size} declared`);
    if (crc32(out) >>> 0 !== crc) return fail(`zip entry ${name} fails its checksum (the file is damaged)`);
    entriesOut.set(fullName, out);
  }
  return { ok: true, entries: entriesOut };
}
