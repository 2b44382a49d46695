// COPY's text format, as the PostgreSQL standings writer sends it (lib/server/fits/copy-text.ts).
// Expected strings hand-written from the PostgreSQL manual, COPY, "Text Format": fields separated by
// a tab, \N for null, backslash escapes for backslash, tab, newline and carriage return; bytea
// input in hex format is \x followed by hex digits (its backslash escaped again inside COPY text).
import { describe, expect, it } from 'vitest';
import { copyField, copyLine } from '@/lib/server/fits/copy-text';

describe('COPY text fields', () => {
  it('null, numbers, text with each escaped character, bytes', () => {
    expect(copyField(null)).toBe('\\N');
    expect(copyField(undefined)).toBe('\\N');
    expect(copyField(0.1)).toBe('0.1');
    expect(copyField(-2.5e-12)).toBe('-2.5e-12');
    expect(copyField(1e30)).toBe('1e+30');
    expect(copyField('a\tb')).toBe('a\\tb');
    expect(copyField('a\nb\rc')).toBe('a\\nb\\rc');
    expect(copyField('back\\slash')).toBe('back\\\\slash');
    // The two characters backslash and N as data are not a null.
    expect(copyField('\\N')).toBe('\\\\N');
    expect(copyField(Uint8Array.from([0, 15, 255]))).toBe('\\\\x000fff');
    expect(copyField(Buffer.from([0xab]))).toBe('\\\\xab');
  });

  it('a subarray of bytes is written alone, not its whole buffer', () => {
    const whole = Uint8Array.from([1, 2, 3, 4]);
    expect(copyField(whole.subarray(1, 3))).toBe('\\\\x0203');
  });

  it('refuses NaN and infinities (the writer clamps them before)', () => {
    expect(() => copyField(NaN)).toThrow('COPY text: NaN is not a finite number');
    expect(() => copyField(Infinity)).toThrow('COPY text: Infinity is not a finite number');
  });

  it('a row is its fields joined by tabs, ended by a newline', () => {
    expect(copyLine(['id:1', 0.5, null, 'x\ty'])).toBe('id:1\t0.5\t\\N\tx\\ty\n');
  });
});
