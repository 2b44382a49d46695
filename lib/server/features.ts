// Feature vectors in the database: little-endian IEEE-754 float32, 4 bytes per value, no header
// (Sample.features is featureCount × 4 bytes). Never JSON text.

const HOST_IS_LITTLE_ENDIAN = new Uint8Array(new Uint32Array([1]).buffer)[0] === 1;

export class FeatureBytesError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'FeatureBytesError';
  }
}

/**
 * Packs a vector as little-endian float32 bytes. Float64 inputs are rounded to the nearest
 * float32 (as `Math.fround`). Returns a fresh, unshared Uint8Array (Prisma `Bytes`).
 */
export function encodeFeatures(values: Float32Array | Float64Array | ArrayLike<number>): Uint8Array<ArrayBuffer> {
  const n = values.length;
  const out = new Uint8Array(n * 4);
  if (HOST_IS_LITTLE_ENDIAN) {
    const view = new Float32Array(out.buffer);
    if (values instanceof Float32Array) view.set(values);
    else for (let i = 0; i < n; i++) view[i] = values[i];
  } else {
    const dv = new DataView(out.buffer);
    for (let i = 0; i < n; i++) dv.setFloat32(i * 4, values[i], true);
  }
  return out;
}

/** Decodes little-endian float32 bytes; checks the length when `expectedLength` is given. */
export function decodeFeatures(bytes: Uint8Array, expectedLength?: number): Float32Array {
  if (bytes.byteLength % 4 !== 0) {
    throw new FeatureBytesError(`feature bytes must be a multiple of 4 long, got ${bytes.byteLength}`);
  }
  const n = bytes.byteLength / 4;
  if (expectedLength !== undefined && n !== expectedLength) {
    throw new FeatureBytesError(`expected ${expectedLength} features, got ${n}`);
  }
  const out = new Float32Array(n);
  decodeFeaturesInto(bytes, out, 0);
  return out;
}

/**
 * Decodes into `out` starting at `offset` (row-major matrices without per-row allocation).
 * Returns the number of values written.
 */
export function decodeFeaturesInto(bytes: Uint8Array, out: Float32Array | Float64Array, offset: number): number {
  if (bytes.byteLength % 4 !== 0) {
    throw new FeatureBytesError(`feature bytes must be a multiple of 4 long, got ${bytes.byteLength}`);
  }
  const n = bytes.byteLength / 4;
  if (offset < 0 || offset + n > out.length) {
    throw new FeatureBytesError(`cannot write ${n} features at offset ${offset} into ${out.length}`);
  }
  if (HOST_IS_LITTLE_ENDIAN && bytes.byteOffset % 4 === 0) {
    const view = new Float32Array(bytes.buffer, bytes.byteOffset, n);
    out.set(view, offset);
  } else {
    const dv = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
    for (let i = 0; i < n; i++) out[offset + i] = dv.getFloat32(i * 4, true);
  }
  return n;
}
