import { describe, expect, it } from 'vitest';
import { applyPreprocessor, fitPreprocessor, selectRows } from '@/lib/margin/preprocess';
import { EngineInputError, type DenseRows } from '@/lib/margin/types';

const rows = (data: number[][]): DenseRows => ({
  data: Float64Array.from(data.flat()),
  rows: data.length,
  cols: data[0].length,
});

describe('standardise', () => {
  it('z-scores each column with the population standard deviation (hand-worked)', () => {
    // Column 0 = [1, 2, 3]: mean 2, variance ((−1)² + 0² + 1²)/3 = 2/3, sd = √(2/3) ≈ 0.816497.
    // Column 1 = [10, 10, 10]: zero variance → mapped to 0 and reported.
    // Column 2 = [0, 0, 6]: mean 2, variance (4 + 4 + 16)/3 = 8, sd = 2√2 ≈ 2.828427.
    const X = rows([
      [1, 10, 0],
      [2, 10, 0],
      [3, 10, 6],
    ]);
    const p = fitPreprocessor(X, 'standard');
    expect(p.zeroVarianceColumns).toEqual([1]);
    expect(Array.from(p.mean as Float64Array)).toEqual([2, 10, 2]);
    expect((p.scale as Float64Array)[0]).toBeCloseTo(Math.sqrt(2 / 3), 12);
    expect((p.scale as Float64Array)[2]).toBeCloseTo(2 * Math.SQRT2, 12);
    const Z = applyPreprocessor(p, X);
    // (1 − 2)/√(2/3) = −√1.5 ≈ −1.224745; (0 − 2)/(2√2) = −1/√2 ≈ −0.707107; (6 − 2)/(2√2) = √2.
    expect(Z.data[0]).toBeCloseTo(-Math.sqrt(1.5), 12);
    expect(Z.data[1]).toBe(0);
    expect(Z.data[2]).toBeCloseTo(-1 / Math.SQRT2, 12);
    expect(Z.data[8]).toBeCloseTo(Math.SQRT2, 12);
    // Later rows use the training statistics: (5 − 2)/√(2/3) = 3·√1.5; the constant column stays 0 even if it moves.
    const later = applyPreprocessor(p, rows([[5, 99, 2]]));
    expect(later.data[0]).toBeCloseTo(3 * Math.sqrt(1.5), 12);
    expect(later.data[1]).toBe(0);
    expect(later.data[2]).toBe(0);
  });

  it('standardised columns have mean 0 and population variance 1', () => {
    const X = rows([
      [3, -1],
      [7, 4],
      [1, 0.5],
      [9, 2],
      [0, 8],
    ]);
    const Z = applyPreprocessor(fitPreprocessor(X, 'standard'), X);
    for (let j = 0; j < 2; j++) {
      let m = 0;
      let v = 0;
      for (let i = 0; i < 5; i++) m += Z.data[i * 2 + j] / 5;
      for (let i = 0; i < 5; i++) v += (Z.data[i * 2 + j] - m) ** 2 / 5;
      expect(m).toBeCloseTo(0, 12);
      expect(v).toBeCloseTo(1, 12);
    }
  });
});

describe('l2 and none', () => {
  it('l2 divides each row by its norm; a zero row stays zero and is counted', () => {
    // (3, 4): norm 5 → (0.6, 0.8); (0, −2): norm 2 → (0, −1).
    const X = rows([
      [3, 4],
      [0, 0],
      [0, -2],
    ]);
    const p = fitPreprocessor(X, 'l2');
    expect(p.zeroNormRows).toBe(1);
    expect(Array.from(applyPreprocessor(p, X).data)).toEqual([0.6, 0.8, 0, 0, 0, -1]);
  });

  it('none hands the rows on as given (no copy)', () => {
    const X: DenseRows = { data: Float32Array.from([1.5, 2]), rows: 1, cols: 2 };
    const out = applyPreprocessor(fitPreprocessor(X, 'none'), X);
    expect(out.data).toBe(X.data);
    expect(Array.from(out.data)).toEqual([1.5, 2]);
  });

  it('rejects a column-count mismatch and an unknown kind', () => {
    const p = fitPreprocessor(rows([[1, 2]]), 'none');
    expect(() => applyPreprocessor(p, rows([[1, 2, 3]]))).toThrow(new EngineInputError('preprocessor was fitted on 2 features, got 3'));
    expect(() => fitPreprocessor(rows([[1]]), 'minmax' as 'none')).toThrow(EngineInputError);
  });

  it('selectRows copies rows in the given order', () => {
    const X = rows([
      [1, 2],
      [3, 4],
      [5, 6],
    ]);
    expect(Array.from(selectRows(X, [2, 0]).data)).toEqual([5, 6, 1, 2]);
  });
});
