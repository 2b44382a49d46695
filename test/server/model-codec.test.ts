// Fit.model (lib/server/fits/model-codec.ts): what a later fit of the same rows starts its solver
// from — each linear DCD boundary's decision values and the training classes — survives the round
// trip, and a model written before these were stored still decodes (without them).
import { describe, expect, it } from 'vitest';
import { fitMargins, type LabelledData } from '@/lib/margin/model';
import { decodeModel, encodeModel, type ModelHeader } from '@/lib/server/fits/model-codec';

// A worked example of our own: three classes on a line with a little spread in a second feature.
const data: LabelledData = {
  ids: Array.from({ length: 12 }, (_, i) => `s${i}`),
  labels: Array.from({ length: 12 }, (_, i) => ['left', 'middle', 'right'][Math.floor(i / 4)]),
  X: { rows: 12, cols: 2, data: Float64Array.from({ length: 24 }, (_, k) => (k % 2 === 0 ? Math.floor(k / 8) * 3 + (k % 8) / 8 : ((k * 7) % 5) / 5)) },
};

/** The same bytes with the header rewritten (the array section is kept as it is). */
function withHeader(bytes: Uint8Array, edit: (h: ModelHeader) => ModelHeader): Uint8Array {
  const h = new DataView(bytes.buffer, bytes.byteOffset).getUint32(4, true);
  const header = JSON.parse(new TextDecoder().decode(bytes.subarray(8, 8 + h))) as ModelHeader;
  const blob = bytes.subarray(Math.ceil((8 + h) / 8) * 8);
  const json = new TextEncoder().encode(JSON.stringify(edit(header)));
  const start = Math.ceil((8 + json.length) / 8) * 8;
  const out = new Uint8Array(start + blob.length);
  out.set(bytes.subarray(0, 4), 0);
  new DataView(out.buffer).setUint32(4, json.length, true);
  out.set(json, 8);
  out.set(blob, start);
  return out;
}

describe('model codec', () => {
  const fit = fitMargins(data, { kernel: { type: 'linear' }, C: 1, solver: 'dcd', scale: 'none', seed: 3, pivotCap: 0 });
  const bytes = encodeModel(fit, data.ids);

  it('keeps each linear DCD boundary\'s decision values (float32) and every row\'s class', () => {
    const model = decodeModel(bytes);
    expect(model.classIndex && Array.from(model.classIndex)).toEqual([0, 0, 0, 0, 1, 1, 1, 1, 2, 2, 2, 2]);
    expect(model.boundaries).toHaveLength(3);
    model.boundaries.forEach((b, k) => {
      expect(b.decision && Array.from(b.decision)).toEqual(Array.from(Float32Array.from(fit.boundaries[k].solution.decision)));
      expect(b.w && Array.from(b.w)).toEqual(Array.from(fit.boundaries[k].solution.w ?? []));
    });
  });

  it('a model without them (written before they were stored) decodes with null in their place', () => {
    const old = withHeader(bytes, (h) => ({ ...h, classIndex: undefined, boundaries: h.boundaries.map((b) => ({ ...b, decision: undefined })) }));
    const model = decodeModel(old);
    expect(model.classIndex).toBeNull();
    expect(model.boundaries.map((b) => b.decision)).toEqual([null, null, null]);
    expect(Array.from(model.boundaries[0].alpha)).toEqual(Array.from(fit.boundaries[0].solution.alpha));
  });

  it('an SMO model stores no decision values', () => {
    const smo = fitMargins(data, { kernel: { type: 'linear' }, C: 1, solver: 'smo', scale: 'none', seed: 3, pivotCap: 0 });
    expect(decodeModel(encodeModel(smo, data.ids)).boundaries.map((b) => b.decision)).toEqual([null, null, null]);
  });
});
