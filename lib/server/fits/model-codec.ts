/**
 * Fit.model: the serialised result of a fit — enough to warm-start the next fit, to evaluate the
 * boundaries on new rows and to preprocess rows for nearest-neighbour lookups.
 *
 * Layout (little-endian):
 *   bytes 0–3   "BLM1"
 *   bytes 4–7   uint32 header length H
 *   8 … 8+H     header, UTF-8 JSON (ModelHeader); arrays are referenced by `ArrayRef`
 *   then        zero padding to a multiple of 8, then the array blobs, each 8-byte aligned
 * Arrays: 'f64' Float64Array, 'f32' Float32Array, 'i32' Int32Array.
 */
import type { FitResult } from '../../margin/model';

type ArrayKind = 'f64' | 'f32' | 'i32';
export interface ArrayRef {
  readonly kind: ArrayKind;
  readonly offset: number;
  readonly length: number;
}

export interface BoundaryHeader {
  readonly positive: string;
  readonly negative: readonly string[];
  readonly name: string;
  readonly b: number;
  readonly wNorm: number;
  readonly marginWidth: number | null;
  readonly formulation: string;
  /** primal weights (linear kernel), null otherwise */
  readonly w: ArrayRef | null;
  /** dual weights α, one per sample in `sampleIds` order */
  readonly alpha: ArrayRef;
  /** non-linear kernels: support vectors (row indices, αᵢyᵢ, preprocessed rows as float32) */
  readonly sv: { readonly index: ArrayRef; readonly coef: ArrayRef; readonly rows: ArrayRef; readonly cols: number } | null;
  /**
   * Linear DCD boundaries: the decision value of each sample (float32, `sampleIds` order), with
   * `classIndex` what a later fit of the same rows starts its solver from (model.ts WarmBoundary).
   * Absent in models written before it was added.
   */
  readonly decision?: ArrayRef | null;
}

export interface ModelHeader {
  readonly version: 1;
  readonly classes: readonly string[];
  /** Sample.id of each training row */
  readonly sampleIds: readonly string[];
  readonly kernel: FitResult['settings']['kernel'];
  readonly solver: string;
  readonly C: number;
  readonly scale: string;
  readonly preprocessor: {
    readonly kind: string;
    readonly cols: number;
    readonly mean: ArrayRef | null;
    readonly scale: ArrayRef | null;
    readonly zeroVarianceColumns: readonly number[];
    readonly zeroNormRows: number;
  };
  readonly boundaries: readonly BoundaryHeader[];
  /** full passes: out-of-fold decision per boundary and sample, and pivot influence per sample */
  readonly audit?: { readonly oof: readonly ArrayRef[]; readonly pivotDelta: ArrayRef } | null;
  /** each training row's class (index into `classes`); absent in models written before it was added */
  readonly classIndex?: ArrayRef | null;
}

export interface DecodedBoundary extends Omit<BoundaryHeader, 'w' | 'alpha' | 'sv' | 'decision'> {
  readonly w: Float64Array | null;
  readonly alpha: Float64Array;
  readonly sv: { readonly index: Int32Array; readonly coef: Float64Array; readonly rows: Float32Array; readonly cols: number } | null;
  readonly decision: Float32Array | null;
}

export interface DecodedModel {
  readonly header: ModelHeader;
  readonly audit: { readonly oof: Float64Array[]; readonly pivotDelta: Float64Array } | null;
  readonly preprocessor: { kind: string; cols: number; mean: Float64Array | null; scale: Float64Array | null };
  readonly boundaries: readonly DecodedBoundary[];
  readonly classIndex: Int32Array | null;
}

const MAGIC = [0x42, 0x4c, 0x4d, 0x31]; // "BLM1"

class BlobWriter {
  readonly parts: { kind: ArrayKind; data: Float64Array | Float32Array | Int32Array; offset: number }[] = [];
  size = 0;
  add(kind: ArrayKind, data: Float64Array | Float32Array | Int32Array): ArrayRef {
    const offset = this.size;
    this.parts.push({ kind, data, offset });
    this.size += Math.ceil(data.byteLength / 8) * 8;
    return { kind, offset, length: data.length };
  }
}

/**
 * `preprocessor` overrides the result's own when the rows were preprocessed before the engine saw
 * them (the refit service L2-normalises rows itself and fits with scaling "none").
 */
export function encodeModel(
  result: FitResult,
  sampleIds: readonly string[],
  preprocessor?: FitResult['preprocessor'],
  audit?: { oof: readonly Float64Array[]; pivotDelta: Float64Array } | null,
): Uint8Array<ArrayBuffer> {
  const blobs = new BlobWriter();
  const p = preprocessor ?? result.preprocessor;
  const boundaries: BoundaryHeader[] = result.boundaries.map((b) => {
    const sv = b.supportVectors;
    return {
      positive: b.positive,
      negative: b.negative,
      name: b.name,
      b: b.solution.b,
      wNorm: b.wNorm,
      marginWidth: Number.isFinite(b.marginWidth) ? b.marginWidth : null,
      formulation: b.formulation,
      w: b.solution.w ? blobs.add('f64', b.solution.w) : null,
      alpha: blobs.add('f64', b.solution.alpha),
      sv: sv
        ? {
            index: blobs.add('i32', sv.index),
            coef: blobs.add('f64', sv.coef),
            rows: blobs.add('f32', sv.rows.data instanceof Float32Array ? sv.rows.data : Float32Array.from(sv.rows.data)),
            cols: sv.rows.cols,
          }
        : null,
      decision: b.solution.formulation === 'dcd-regularised-bias' && b.solution.w ? blobs.add('f32', Float32Array.from(b.solution.decision)) : null,
    };
  });
  const header: ModelHeader = {
    version: 1,
    classes: result.classes,
    sampleIds,
    kernel: result.settings.kernel,
    solver: result.settings.solver,
    C: result.settings.C,
    scale: p.kind,
    preprocessor: {
      kind: p.kind,
      cols: p.cols,
      mean: p.mean ? blobs.add('f64', p.mean) : null,
      scale: p.scale ? blobs.add('f64', p.scale) : null,
      zeroVarianceColumns: p.zeroVarianceColumns,
      zeroNormRows: p.zeroNormRows,
    },
    boundaries,
    audit: audit ? { oof: audit.oof.map((o) => blobs.add('f64', o)), pivotDelta: blobs.add('f64', audit.pivotDelta) } : null,
    classIndex: blobs.add('i32', result.classIndex),
  };
  const json = new TextEncoder().encode(JSON.stringify(header));
  const start = Math.ceil((8 + json.length) / 8) * 8;
  const out = new Uint8Array(start + blobs.size);
  out.set(MAGIC, 0);
  new DataView(out.buffer).setUint32(4, json.length, true);
  out.set(json, 8);
  for (const part of blobs.parts) {
    out.set(new Uint8Array(part.data.buffer, part.data.byteOffset, part.data.byteLength), start + part.offset);
  }
  return out;
}

export class ModelFormatError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'ModelFormatError';
  }
}

export function decodeModel(bytes: Uint8Array): DecodedModel {
  if (bytes.length < 8 || MAGIC.some((m, i) => bytes[i] !== m)) throw new ModelFormatError('not a Borderline model (bad magic)');
  const view = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  const h = view.getUint32(4, true);
  if (8 + h > bytes.length) throw new ModelFormatError('truncated model header');
  const header = JSON.parse(new TextDecoder().decode(bytes.subarray(8, 8 + h))) as ModelHeader;
  if (header.version !== 1) throw new ModelFormatError(`unsupported model version ${String(header.version)}`);
  const start = Math.ceil((8 + h) / 8) * 8;
  // Copy the blob section into an aligned buffer (Prisma's Bytes may sit at any byte offset).
  const blob = bytes.slice(start);
  const check = (ref: ArrayRef, kind: ArrayKind): void => {
    if (ref.kind !== kind) throw new ModelFormatError(`expected ${kind}, got ${ref.kind}`);
    const size = kind === 'f64' ? 8 : 4;
    if (ref.offset % 8 !== 0 || ref.offset + ref.length * size > blob.length) throw new ModelFormatError('truncated model data');
  };
  const f64 = (ref: ArrayRef): Float64Array => {
    check(ref, 'f64');
    return new Float64Array(blob.buffer, ref.offset, ref.length);
  };
  const f32 = (ref: ArrayRef): Float32Array => {
    check(ref, 'f32');
    return new Float32Array(blob.buffer, ref.offset, ref.length);
  };
  const i32 = (ref: ArrayRef): Int32Array => {
    check(ref, 'i32');
    return new Int32Array(blob.buffer, ref.offset, ref.length);
  };
  const boundaries: DecodedBoundary[] = header.boundaries.map((b) => ({
    positive: b.positive,
    negative: b.negative,
    name: b.name,
    b: b.b,
    wNorm: b.wNorm,
    marginWidth: b.marginWidth,
    formulation: b.formulation,
    w: b.w ? f64(b.w) : null,
    alpha: f64(b.alpha),
    sv: b.sv ? { index: i32(b.sv.index), coef: f64(b.sv.coef), rows: f32(b.sv.rows), cols: b.sv.cols } : null,
    decision: b.decision ? f32(b.decision) : null,
  }));
  const p = header.preprocessor;
  return {
    header,
    audit: header.audit ? { oof: header.audit.oof.map(f64), pivotDelta: f64(header.audit.pivotDelta) } : null,
    preprocessor: { kind: p.kind, cols: p.cols, mean: p.mean ? f64(p.mean) : null, scale: p.scale ? f64(p.scale) : null },
    boundaries,
    classIndex: header.classIndex ? i32(header.classIndex) : null,
  };
}
