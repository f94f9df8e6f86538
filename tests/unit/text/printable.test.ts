import { describe, expect, it } from 'vitest';
import { hasUnsafeCharacters, printable } from '../../../engine/text/printable.js';

describe('printable text from files', () => {
  it('escapes terminal escape codes and line breaks, so a value cannot forge an output line', () => {
    expect(printable('bed-12\r\nADVICE: give 5000 mg')).toBe('bed-12\\r\\nADVICE: give 5000 mg');
    expect(printable('\u001b[2J\u001b[31mP01')).toBe('\\x1b[2J\\x1b[31mP01');
    expect(printable('a\u202eb\u0085c')).toBe('a\\u202eb\\x85c');
  });

  it('leaves ordinary text, accents and units unchanged', () => {
    const text = 'Zoë µg/mL 2.5 – CrCl (mL/min)';
    expect(printable(text)).toBe(text);
    expect(hasUnsafeCharacters(text)).toBe(false);
    expect(hasUnsafeCharacters('x\u0007')).toBe(true);
  });
});
