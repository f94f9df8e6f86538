/**
 * Text that came from a file (patient ids, sheet names, cell values, JSON strings) made safe to
 * show in a terminal, a report or the UI: control characters (C0, DEL, C1), line and paragraph
 * separators and bidirectional overrides are shown escaped (`\x1b`, `\n`, `\u202e`), so a value
 * cannot move the cursor, colour the screen or forge a line such as "ADVICE: give 5000 mg".
 */
const UNSAFE = /[\u0000-\u001f\u007f-\u009f\u2028\u2029\u200e\u200f\u202a-\u202e\u2066-\u2069]/g;

function escapeChar(c: string): string {
  switch (c) {
    case '\n':
      return '\\n';
    case '\r':
      return '\\r';
    case '\t':
      return '\\t';
    default: {
      const code = c.charCodeAt(0);
      return code <= 0xff ? `\\x${code.toString(16).padStart(2, '0')}` : `\\u${code.toString(16).padStart(4, '0')}`;
    }
  }
}

/** `text` with every unsafe character escaped; safe text is returned unchanged. */
export function printable(text: string): string {
  return text.replace(UNSAFE, escapeChar);
}

/** True when printable(text) would change it. */
export function hasUnsafeCharacters(text: string): boolean {
  UNSAFE.lastIndex = 0;
  const found = UNSAFE.test(text);
  UNSAFE.lastIndex = 0;
  return found;
}
