// Pure pieces of the Data area, checked against outside references where one exists:
// the UTF-8 locator against Node's WHATWG TextDecoder (fatal mode), the CSV-cell neutralising
// against the OWASP "CSV Injection" list of trigger characters, float32 formatting against
// Math.fround, and the browser preview's CSV splitter against csv-parse.

import fc from 'fast-check';
import { parse as parseCsvSync } from 'csv-parse/sync';
import { describe, expect, it } from 'vitest';
import { analyseHeader, neutraliseCell, previewHead, splitCsvRecords, unneutraliseCell } from '@/lib/data-columns';
import { formatFloat32, parseFeatureText } from '@/lib/server/import/numbers';
import { firstInvalidUtf8 } from '@/lib/server/import/utf8';

describe('firstInvalidUtf8 agrees with TextDecoder({ fatal: true })', () => {
  it('on random bytes biased towards multi-byte sequences', () => {
    const byte = fc.oneof(fc.integer({ min: 0, max: 0x7f }), fc.integer({ min: 0x80, max: 0xbf }), fc.integer({ min: 0xc0, max: 0xff }));
    fc.assert(
      fc.property(fc.array(byte, { maxLength: 12 }), (arr) => {
        const bytes = Uint8Array.from(arr);
        let valid = true;
        try {
          new TextDecoder('utf-8', { fatal: true }).decode(bytes); // reference: Node's WHATWG Encoding implementation
        } catch {
          valid = false;
        }
        expect(firstInvalidUtf8(bytes) === -1).toBe(valid);
      }),
      { numRuns: 3000, seed: 42 },
    );
  });

  it('names the first bad byte (hand-checked cases)', () => {
    // "é" in Latin-1 is 0xE9 followed by ASCII: an incomplete 3-byte lead at index 2.
    expect(firstInvalidUtf8(Uint8Array.from([0x61, 0x62, 0xe9, 0x63]))).toBe(2);
    // Overlong "/" (0xC0 0xAF) is refused (RFC 3629 §3); a surrogate (ED A0 80) too.
    expect(firstInvalidUtf8(Uint8Array.from([0xc0, 0xaf]))).toBe(0);
    expect(firstInvalidUtf8(Uint8Array.from([0x41, 0xed, 0xa0, 0x80]))).toBe(1);
    // "€" (E2 82 AC) is fine; cut after two bytes it is incomplete only at the end of the input.
    expect(firstInvalidUtf8(Uint8Array.from([0xe2, 0x82, 0xac]))).toBe(-1);
    expect(firstInvalidUtf8(Uint8Array.from([0xe2, 0x82]), 0, false)).toBe(-1);
    expect(firstInvalidUtf8(Uint8Array.from([0xe2, 0x82]), 0, true)).toBe(0);
  });
});

describe('CSV injection neutralising (OWASP: = + - @ tab CR)', () => {
  it('prefixes exactly the cells a spreadsheet would run', () => {
    for (const c of ['=1+1', '+1', '-1', '@SUM(A1)', '\tx', '\rx']) expect(neutraliseCell(c)).toBe(`'${c}`);
    for (const c of ['a=1', '1-2', '', ' =x', 'x@y']) expect(neutraliseCell(c)).toBe(c);
    expect(neutraliseCell("'=x")).toBe("''=x");
  });
  it('is undone exactly by unneutraliseCell for every string', () => {
    fc.assert(
      fc.property(fc.string({ unit: fc.constantFrom("'", '=', '+', '-', '@', '\t', '\r', 'a', ' ') }), (s) => {
        expect(unneutraliseCell(neutraliseCell(s))).toBe(s);
        const n = neutraliseCell(s);
        expect(/^[=+\-@\t\r]/.test(n)).toBe(false);
      }),
      { numRuns: 2000, seed: 7 },
    );
  });
});

describe('float32 text', () => {
  it('formatFloat32 reads back to the same float32 and parseFeatureText rounds like Math.fround', () => {
    fc.assert(
      fc.property(fc.float({ noNaN: true, noDefaultInfinity: true }), (v) => {
        const text = formatFloat32(v);
        const back = parseFeatureText(text);
        expect(typeof back).toBe('number');
        expect(Object.is(back, v)).toBe(true);
      }),
      { numRuns: 3000, seed: 99 },
    );
    expect(parseFeatureText('0.1')).toBe(Math.fround(0.1));
    // 3.4028235e38 is the largest float32 (IEEE 754 binary32); 3.5e38 rounds to infinity.
    expect(parseFeatureText('3.4028235e38')).toBe(Math.fround(3.4028235e38));
    expect(parseFeatureText('3.5e38')).toBe('"3.5e38" is outside the range of 32-bit floats.');
  });
});

describe('browser preview', () => {
  it('splits CSV like csv-parse (reference parser) on quoted, multi-line and CRLF input', () => {
    const cell = fc.string({ unit: fc.constantFrom('a', '"', ',', '\n', ' ', 'é'), maxLength: 6 });
    fc.assert(
      fc.property(fc.array(fc.array(cell, { minLength: 2, maxLength: 2 }), { minLength: 1, maxLength: 5 }), fc.boolean(), (rows, crlf) => {
        const text = rows.map((r) => r.map((c) => `"${c.replace(/"/g, '""')}"`).join(',')).join(crlf ? '\r\n' : '\n');
        const ours = splitCsvRecords(text, true, 100);
        const reference = parseCsvSync(text, { relax_column_count: true }) as string[][];
        expect(ours).toEqual(reference);
      }),
      { numRuns: 500, seed: 3 },
    );
  });

  it('recognises the format and the columns', () => {
    const csv = new TextEncoder().encode('id,label,notes,emb_0,emb_1,meta.src\na,x,hi,1,2,web\nb,y');
    const p = previewHead(csv, false, { featurePrefix: 'emb_' });
    expect(p.format).toBe('csv');
    expect(p.rows).toEqual([['a', 'x', 'hi', '1', '2', 'web']]);
    expect(p.analysis?.featureIndices).toEqual([3, 4]);
    expect(p.analysis?.columns.map((c) => c.role)).toEqual(['id', 'label', 'ignored', 'feature', 'feature', 'meta']);
    const jsonl = previewHead(new TextEncoder().encode('{"id":"a","label":"x","features":[1,2,3,4,5,6]}\n'), true);
    expect(jsonl.format).toBe('jsonl');
    expect(jsonl.rows[0][2]).toBe('[1, 2, 3, 4, … 6 values]');
    expect(previewHead(Uint8Array.from([0x50, 0x4b, 0x03, 0x04]), true).problem).toMatch(/ZIP archive/);
    expect(analyseHeader(['id', 'label', 'features', 'x']).featureIndices).toEqual([]);
  });
});
