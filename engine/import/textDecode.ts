/**
 * Decoding the bytes of a text file (CSV): UTF-16 by its byte-order mark, else strict UTF-8, else
 * Latin-1, with damaged UTF-8 named. Its own module, with no spreadsheet library, so reading a
 * canonical CSV (main/services/datasetLoader.ts) loads only this; engine/import/workbook.ts
 * re-exports it for the spreadsheet reader.
 */

/**
 * Text of a CSV file: UTF-16 by its byte-order mark, else strict UTF-8 (BOM dropped), else
 * Latin-1 (older exports from Windows systems). SheetJS would read UTF-8 without a BOM as Latin-1.
 */
export function decodeText(bytes: Uint8Array): string {
  return decodeTextChecked(bytes).text;
}

/**
 * As decodeText, and when the bytes are UTF-8 (they hold valid multi-byte sequences) but some
 * sequence is broken, the text is decoded as UTF-8 with U+FFFD in the broken places and the
 * damage is named: reading such a file as Latin-1 would silently change every accented letter
 * ("hämolysiert" would no longer match its exclusion word).
 */
export function decodeTextChecked(bytes: Uint8Array): { text: string; damage?: { line: number; message: string } } {
  const text = decodeTextLoose(bytes);
  if (text.kind !== 'latin1' || !hasValidMultibyte(bytes)) return { text: text.text };
  // Damaged UTF-8: decode leniently and say where.
  const out: string[] = [];
  let firstBad = -1;
  let i = bytes.length >= 3 && bytes[0] === 0xef && bytes[1] === 0xbb && bytes[2] === 0xbf ? 3 : 0;
  let chunk: number[] = [];
  const flush = () => {
    out.push(String.fromCharCode.apply(null, chunk));
    chunk = [];
  };
  while (i < bytes.length) {
    if (chunk.length >= 8190) flush();
    const n = utf8Sequence(bytes, i);
    if (n === 0) {
      if (firstBad < 0) firstBad = i;
      chunk.push(0xfffd);
      i++;
      continue;
    }
    const b = bytes[i];
    if (n === 1) chunk.push(b);
    else if (n === 2) chunk.push(((b & 0x1f) << 6) | (bytes[i + 1] & 0x3f));
    else if (n === 3) chunk.push(((b & 0x0f) << 12) | ((bytes[i + 1] & 0x3f) << 6) | (bytes[i + 2] & 0x3f));
    else {
      const cp = (((b & 0x07) << 18) | ((bytes[i + 1] & 0x3f) << 12) | ((bytes[i + 2] & 0x3f) << 6) | (bytes[i + 3] & 0x3f)) - 0x10000;
      chunk.push(0xd800 + (cp >> 10), 0xdc00 + (cp & 0x3ff));
    }
    i += n;
  }
  flush();
  let line = 1;
  for (let k = 0; k < firstBad; k++) if (bytes[k] === 10) line++;
  return {
    text: out.join(''),
    damage: { line, message: `the file is UTF-8 text, but byte ${firstBad} (line ${line}) is not valid UTF-8: the file is damaged; compare that line with the source and save the file again` },
  };
}

/** Length of the valid UTF-8 sequence at i (1-4), or 0 when it is broken. */
function utf8Sequence(bytes: Uint8Array, i: number): number {
  const n = bytes.length;
  const b = bytes[i];
  if (b < 0x80) return 1;
  const cont = (k: number) => i + k < n && (bytes[i + k] & 0xc0) === 0x80;
  if (b >= 0xc2 && b < 0xe0) return cont(1) ? 2 : 0;
  if (b >= 0xe0 && b < 0xf0) return cont(1) && cont(2) ? 3 : 0;
  if (b >= 0xf0 && b < 0xf5) return cont(1) && cont(2) && cont(3) ? 4 : 0;
  return 0;
}

function hasValidMultibyte(bytes: Uint8Array): boolean {
  for (let i = 0; i < bytes.length; i++) if (bytes[i] >= 0xc2 && utf8Sequence(bytes, i) > 1) return true;
  return false;
}

function decodeTextLoose(bytes: Uint8Array): { text: string; kind: 'utf16' | 'utf8' | 'latin1' } {
  if (bytes.length >= 2 && ((bytes[0] === 0xff && bytes[1] === 0xfe) || (bytes[0] === 0xfe && bytes[1] === 0xff))) {
    const le = bytes[0] === 0xff;
    const parts: string[] = [];
    let chunk: number[] = [];
    for (let i = 2; i + 1 < bytes.length; i += 2) {
      chunk.push(le ? bytes[i] | (bytes[i + 1] << 8) : (bytes[i] << 8) | bytes[i + 1]);
      if (chunk.length === 8192) {
        parts.push(String.fromCharCode(...chunk));
        chunk = [];
      }
    }
    parts.push(String.fromCharCode(...chunk));
    return { text: parts.join(''), kind: 'utf16' };
  }
  let i = bytes.length >= 3 && bytes[0] === 0xef && bytes[1] === 0xbb && bytes[2] === 0xbf ? 3 : 0;
  const start = i;
  const parts: string[] = [];
  const buf = new Uint16Array(8192);
  let k = 0;
  const n = bytes.length;
  let valid = true;
  while (i < n) {
    if (k >= 8190) {
      parts.push(String.fromCharCode.apply(null, buf.subarray(0, k) as unknown as number[]));
      k = 0;
    }
    const b = bytes[i];
    if (b < 0x80) {
      buf[k++] = b;
      i++;
    } else if (b >= 0xc2 && b < 0xe0 && i + 1 < n && (bytes[i + 1] & 0xc0) === 0x80) {
      buf[k++] = ((b & 0x1f) << 6) | (bytes[i + 1] & 0x3f);
      i += 2;
    } else if (b >= 0xe0 && b < 0xf0 && i + 2 < n && (bytes[i + 1] & 0xc0) === 0x80 && (bytes[i + 2] & 0xc0) === 0x80) {
      buf[k++] = ((b & 0x0f) << 12) | ((bytes[i + 1] & 0x3f) << 6) | (bytes[i + 2] & 0x3f);
      i += 3;
    } else if (b >= 0xf0 && b < 0xf5 && i + 3 < n && (bytes[i + 1] & 0xc0) === 0x80 && (bytes[i + 2] & 0xc0) === 0x80 && (bytes[i + 3] & 0xc0) === 0x80) {
      const cp = (((b & 0x07) << 18) | ((bytes[i + 1] & 0x3f) << 12) | ((bytes[i + 2] & 0x3f) << 6) | (bytes[i + 3] & 0x3f)) - 0x10000;
      buf[k++] = 0xd800 + (cp >> 10);
      buf[k++] = 0xdc00 + (cp & 0x3ff);
      i += 4;
    } else {
      valid = false;
      break;
    }
  }
  if (valid) {
    parts.push(String.fromCharCode.apply(null, buf.subarray(0, k) as unknown as number[]));
    return { text: parts.join(''), kind: 'utf8' };
  }
  const latin: string[] = [];
  for (let j = start; j < n; j += 8192) latin.push(String.fromCharCode.apply(null, bytes.subarray(j, Math.min(n, j + 8192)) as unknown as number[]));
  return { text: latin.join(''), kind: 'latin1' };
}
