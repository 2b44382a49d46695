// Feature vectors as stored in Sample.features: little-endian float32, 4 bytes per value.

import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { decodeFeatures, decodeFeaturesInto, encodeFeatures, FeatureBytesError } from '@/lib/server/features';

const bits = (a: Float32Array) => Array.from(new Uint32Array(a.buffer, a.byteOffset, a.length));

describe('features codec', () => {
  it('writes IEEE-754 single precision, little-endian', () => {
    // Textbook facts (IEEE-754 binary32): 1.0 = 0x3F800000, -2.5 = 0xC0200000,
    // 0.1 rounds to 0x3DCCCCCD; little-endian stores the low byte first.
    expect([...encodeFeatures([1])]).toEqual([0x00, 0x00, 0x80, 0x3f]);
    expect([...encodeFeatures([-2.5])]).toEqual([0x00, 0x00, 0x20, 0xc0]);
    expect([...encodeFeatures(new Float64Array([0.1]))]).toEqual([0xcd, 0xcc, 0xcc, 0x3d]);
    expect(encodeFeatures([]).byteLength).toBe(0);
  });

  it('round-trips every float32 bit pattern, NaN and -0 included', () => {
    fc.assert(
      fc.property(fc.array(fc.float(), { maxLength: 300 }), (values) => {
        const original = Float32Array.from(values);
        const decoded = decodeFeatures(encodeFeatures(original), original.length);
        expect(bits(decoded)).toEqual(bits(original));
      }),
      { numRuns: 300 },
    );
  });

  it('round-trips arbitrary bytes (any 4k-byte string is a valid vector)', () => {
    fc.assert(
      fc.property(fc.uint8Array({ maxLength: 256 }).filter((b) => b.length % 4 === 0), (bytes) => {
        // NaN payloads may be canonicalised by float arithmetic but not by copying: compare bytes.
        const again = encodeFeatures(decodeFeatures(bytes));
        expect(Buffer.from(again).equals(Buffer.from(bytes))).toBe(true);
      }),
    );
  });

  it('rounds float64 input to the nearest float32 (as Math.fround)', () => {
    fc.assert(
      fc.property(fc.array(fc.double({ noNaN: true }), { maxLength: 50 }), (values) => {
        const decoded = decodeFeatures(encodeFeatures(new Float64Array(values)));
        expect(Array.from(decoded)).toEqual(values.map((v) => Math.fround(v)));
      }),
    );
  });

  it('decodes from an unaligned view and into a row of a larger matrix', () => {
    const payload = encodeFeatures([1.5, -3, 7.25]);
    const padded = new Uint8Array(payload.length + 3);
    padded.set(payload, 1);
    const view = padded.subarray(1, 1 + payload.length);
    expect(Array.from(decodeFeatures(view))).toEqual([1.5, -3, 7.25]);
    const matrix = new Float64Array(7).fill(9);
    expect(decodeFeaturesInto(view, matrix, 2)).toBe(3);
    expect(Array.from(matrix)).toEqual([9, 9, 1.5, -3, 7.25, 9, 9]);
  });

  it('refuses byte strings of the wrong length', () => {
    expect(() => decodeFeatures(new Uint8Array(5))).toThrow(new FeatureBytesError('feature bytes must be a multiple of 4 long, got 5'));
    expect(() => decodeFeatures(new Uint8Array(8), 3)).toThrow('expected 3 features, got 2');
    expect(() => decodeFeaturesInto(new Uint8Array(8), new Float32Array(3), 2)).toThrow('cannot write 2 features at offset 2 into 3');
  });
});
