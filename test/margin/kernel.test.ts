import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import {
  decisionValues,
  dotProducts,
  expNonPositive,
  fillKernelRow,
  kernelExpansion,
  kernelValue,
  rowSquaredNorms,
} from '@/lib/margin/kernel';
import { KernelColumnCache } from '@/lib/margin/kernel-cache';
import type { BinaryProblem, BinarySolution, DenseRows, KernelSpec } from '@/lib/margin/types';
import { EngineInputError } from '@/lib/margin/types';

function rows(data: number[][]): DenseRows {
  return { data: Float64Array.from(data.flat()), rows: data.length, cols: data[0].length };
}

/** Deterministic pseudo-random matrix (a fixed linear congruential sequence; values in [−2, 2)). */
function lcgRows(n: number, d: number, seed: number): DenseRows {
  let s = seed >>> 0;
  const data = new Float64Array(n * d);
  for (let k = 0; k < n * d; k++) {
    s = (Math.imul(s, 1664525) + 1013904223) >>> 0;
    data[k] = (s / 2 ** 32) * 4 - 2;
  }
  return { data, rows: n, cols: d };
}

const KERNELS: KernelSpec[] = [
  { type: 'linear' },
  { type: 'rbf', gamma: 0.7 },
  { type: 'poly', gamma: 0.5, degree: 3, coef0: 1 },
];

describe('kernelValue', () => {
  // hand-worked: x = (1, 2), z = (3, −1)
  //   x·z = 1·3 + 2·(−1) = 1
  //   ‖x − z‖² = (1 − 3)² + (2 + 1)² = 4 + 9 = 13
  const X = rows([[1, 2]]);
  const Z = rows([[3, -1]]);
  it('linear kernel is the dot product', () => {
    expect(kernelValue({ type: 'linear' }, X, 0, Z, 0)).toBe(1); // hand-worked: 1
  });
  it('RBF kernel is exp(−γ‖x − z‖²)', () => {
    // hand-worked: γ = 0.1 → exp(−1.3) = 0.272531793… (exp(−1.3) recalled from memory, checked by Math.exp)
    expect(kernelValue({ type: 'rbf', gamma: 0.1 }, X, 0, Z, 0)).toBeCloseTo(Math.exp(-1.3), 15);
    expect(kernelValue({ type: 'rbf', gamma: 0.1 }, X, 0, Z, 0)).toBeCloseTo(0.272531793, 9);
    const sqX = rowSquaredNorms(X);
    const sqZ = rowSquaredNorms(Z);
    expect(Array.from(sqX)).toEqual([5]); // hand-worked: 1 + 4
    expect(Array.from(sqZ)).toEqual([10]); // hand-worked: 9 + 1
    // with norms: 5 + 10 − 2·1 = 13, same value
    expect(kernelValue({ type: 'rbf', gamma: 0.1 }, X, 0, Z, 0, sqX, sqZ)).toBeCloseTo(Math.exp(-1.3), 15);
  });
  it('polynomial kernel is (γ x·z + coef0)^degree', () => {
    // hand-worked: (0.5·1 + 1)³ = 1.5³ = 3.375
    expect(kernelValue({ type: 'poly', gamma: 0.5, degree: 3, coef0: 1 }, X, 0, Z, 0)).toBe(3.375);
  });
  it('RBF of a point with itself is 1 and is symmetric', () => {
    const A = lcgRows(5, 3, 7);
    const spec: KernelSpec = { type: 'rbf', gamma: 2 };
    for (let i = 0; i < 5; i++) {
      expect(kernelValue(spec, A, i, A, i)).toBe(1); // textbook fact: K(x, x) = exp(0) = 1
      for (let j = 0; j < 5; j++) expect(kernelValue(spec, A, i, A, j)).toBe(kernelValue(spec, A, j, A, i));
    }
  });
  it('rejects mismatched dimensions', () => {
    expect(() => kernelValue({ type: 'linear' }, X, 0, rows([[1, 2, 3]]), 0)).toThrow(EngineInputError);
  });
});

describe('expNonPositive (table-driven exp used in RBF kernel rows)', () => {
  it('agrees with Math.exp to 4e-16 relative on [−708, 0]', () => {
    let worst = 0;
    for (let k = 0; k <= 200_000; k++) {
      const x = -708 * (k / 200_000) ** 2;
      const ref = Math.exp(x); // reference: the platform's Math.exp
      worst = Math.max(worst, Math.abs(expNonPositive(x) - ref) / ref);
    }
    expect(worst).toBeLessThan(4e-16);
  });
  it('handles the edges', () => {
    expect(expNonPositive(0)).toBe(1); // textbook fact: e⁰ = 1
    expect(expNonPositive(-0)).toBe(1);
    expect(expNonPositive(-Infinity)).toBe(0);
    expect(expNonPositive(-800)).toBe(Math.exp(-800));
    expect(Number.isNaN(expNonPositive(Number.NaN))).toBe(true);
  });
});

describe('fillKernelRow and dotProducts', () => {
  it('match kernelValue for every kernel, row range and output type', () => {
    fc.assert(
      fc.property(
        fc.integer({ min: 1, max: 21 }),
        fc.integer({ min: 1, max: 7 }),
        fc.integer({ min: 0, max: 1000 }),
        fc.constantFrom(...KERNELS),
        fc.boolean(),
        (n, d, seed, spec, f32) => {
          const A = lcgRows(n, d, seed);
          const sq = rowSquaredNorms(A);
          const from = seed % n;
          const i = (seed * 7) % n;
          const out = f32 ? new Float32Array(n) : new Float64Array(n);
          fillKernelRow(spec, A.data, i, A.data, d, from, n, out, sq, sq, new Float64Array(n));
          for (let j = 0; j < from; j++) expect(out[j]).toBe(0); // untouched below `from`
          for (let j = from; j < n; j++) {
            const ref = kernelValue(spec, A, i, A, j); // reference: direct single evaluation
            const tolerance = f32 ? 1e-6 * Math.max(1, Math.abs(ref)) : 1e-12 * Math.max(1, Math.abs(ref));
            expect(Math.abs(out[j] - ref)).toBeLessThanOrEqual(tolerance);
          }
        },
      ),
      { numRuns: 150 },
    );
  });
  it('dotProducts handles every block remainder', () => {
    for (let n = 1; n <= 19; n++) {
      const A = lcgRows(n, 3, n);
      const out = new Float64Array(n);
      dotProducts(A.data, 0, A.data, 3, 0, n, out);
      for (let j = 0; j < n; j++) {
        let s = 0;
        for (let k = 0; k < 3; k++) s += A.data[k] * A.data[j * 3 + k];
        expect(out[j]).toBeCloseTo(s, 14);
      }
    }
  });
});

describe('decisionValues', () => {
  // hand-worked: training points x₁ = (1, 0) with y = +1, x₂ = (0, 1) with y = −1, α = (0.5, 0.5), b = 0.25
  //   linear: w = 0.5·(1, 0) − 0.5·(0, 1) = (0.5, −0.5); at x = (2, 2): w·x + b = 1 − 1 + 0.25 = 0.25
  //   RBF γ = 1: f(x) = 0.5·exp(−‖x − x₁‖²) − 0.5·exp(−‖x − x₂‖²) + b; at x = (1, 1) both distances are 1,
  //   so f = 0.5e⁻¹ − 0.5e⁻¹ + 0.25 = 0.25; at x = (1, 0): 0.5 − 0.5e⁻² + 0.25
  const train: BinaryProblem = { X: rows([[1, 0], [0, 1]]), y: Int8Array.from([1, -1]) };
  const base = {
    formulation: 'smo-unregularised-bias' as const,
    alpha: Float64Array.from([0.5, 0.5]),
    upperBound: Float64Array.from([1, 1]),
    b: 0.25,
    wNormSquared: 0,
    decision: new Float64Array(2),
    iterations: 0,
    primalObjective: 0,
    dualObjective: 0,
    dualityGap: 0,
    maxKktViolation: 0,
    converged: true,
  };
  it('uses w·x + b for a linear solution with w', () => {
    const sol: BinarySolution = { ...base, kernel: { type: 'linear' }, w: Float64Array.from([0.5, -0.5]) };
    expect(decisionValues(train, sol, rows([[2, 2]]))[0]).toBeCloseTo(0.25, 15); // hand-worked above
  });
  it('uses the kernel expansion otherwise', () => {
    const sol: BinarySolution = { ...base, kernel: { type: 'rbf', gamma: 1 }, w: null };
    const f = decisionValues(train, sol, rows([[1, 1], [1, 0]]));
    expect(f[0]).toBeCloseTo(0.25, 14); // hand-worked above
    expect(f[1]).toBeCloseTo(0.5 - 0.5 * Math.exp(-2) + 0.25, 14); // hand-worked above
    const linear = kernelExpansion({ type: 'linear' }, train, base.alpha, 0.25, rows([[2, 2]]));
    expect(linear[0]).toBeCloseTo(0.25, 15); // hand-worked above, through the expansion
  });
  it('ignores samples with α = 0', () => {
    const sol: BinarySolution = { ...base, kernel: { type: 'rbf', gamma: 1 }, alpha: Float64Array.from([0.5, 0]), w: null };
    // hand-worked: only x₁ contributes: at x₁ itself f = 0.5·1 + 0.25
    expect(decisionValues(train, sol, rows([[1, 0]]))[0]).toBeCloseTo(0.75, 15);
  });
});

describe('KernelColumnCache', () => {
  function directQ(spec: KernelSpec, X: DenseRows, y: Int8Array, r: number, s: number): number {
    return y[r] * y[s] * kernelValue(spec, X, r, X, s);
  }
  const n = 40;
  const X = lcgRows(n, 4, 11);
  const y = Int8Array.from({ length: n }, (_, i) => (i % 3 === 0 ? -1 : 1));
  const all = Int32Array.from({ length: n }, (_, i) => i);

  it('returns columns of Q = yᵢyⱼK(xᵢ, xⱼ) and its diagonal', () => {
    for (const spec of KERNELS) {
      const cache = new KernelColumnCache(X, y, all, { kernel: spec, cacheBytes: 1 << 20, precision: 'float64' });
      for (let i = 0; i < n; i += 3) {
        const col = cache.getQ(i, n);
        for (let j = 0; j < n; j++) expect(col[j]).toBeCloseTo(directQ(spec, X, y, i, j), 12); // reference: definition
        expect(cache.QD[i]).toBeCloseTo(kernelValue(spec, X, i, X, i), 12);
      }
    }
  });

  it('stays within its memory cap and evicts least recently used columns', () => {
    const spec: KernelSpec = { type: 'rbf', gamma: 0.5 };
    // cap of 5 full float32 columns (5·40·4 bytes)
    const cache = new KernelColumnCache(X, y, all, { kernel: spec, cacheBytes: 5 * n * 4, precision: 'float32' });
    for (let i = 0; i < 5; i++) cache.getQ(i, n);
    expect(cache.stats.misses).toBe(5);
    cache.getQ(0, n); // touch 0: now 1 is least recently used
    expect(cache.stats.hits).toBe(1);
    cache.getQ(5, n); // evicts 1
    expect(cache.cachedEntries()).toBeLessThanOrEqual(5 * n);
    expect(cache.cachedBytes()).toBeLessThanOrEqual(5 * n * 4);
    cache.getQ(0, n);
    expect(cache.stats.hits).toBe(2);
    cache.getQ(1, n);
    expect(cache.stats.misses).toBe(7);
    const col = cache.getQ(3, n);
    for (let j = 0; j < n; j++) expect(col[j]).toBeCloseTo(directQ(spec, X, y, 3, j), 6); // float32 storage
    // many more requests of mixed lengths: the cap holds and every column is right (storage is recycled)
    for (let t = 0; t < 200; t++) {
      const i = (t * 7) % n;
      const len = 10 + ((t * 13) % (n - 10));
      const c = cache.getQ(i, len);
      expect(cache.cachedBytes()).toBeLessThanOrEqual(5 * n * 4);
      for (let j = 0; j < len; j++) expect(c[j]).toBeCloseTo(directQ(spec, X, y, i, j), 6);
    }
  });

  it('extends a shorter cached column by computing only the tail', () => {
    const cache = new KernelColumnCache(X, y, all, { kernel: { type: 'linear' }, cacheBytes: 1 << 20, precision: 'float64' });
    cache.getQ(2, 10);
    expect(cache.stats.kernelEvaluations).toBe(10);
    const col = cache.getQ(2, n);
    expect(cache.stats.kernelEvaluations).toBe(n);
    for (let j = 0; j < n; j++) expect(col[j]).toBeCloseTo(directQ({ type: 'linear' }, X, y, 2, j), 12);
  });

  it('keeps cached columns consistent under position swaps', () => {
    fc.assert(
      fc.property(
        fc.array(fc.tuple(fc.integer({ min: 0, max: n - 1 }), fc.integer({ min: 0, max: n - 1 })), { maxLength: 30 }),
        fc.integer({ min: 3, max: 60 }),
        fc.array(fc.tuple(fc.integer({ min: 0, max: n - 1 }), fc.integer({ min: 1, max: n })), { minLength: 1, maxLength: 20 }),
        (swaps, capColumns, requests) => {
          const spec: KernelSpec = { type: 'rbf', gamma: 0.3 };
          const cache = new KernelColumnCache(X, y, all, { kernel: spec, cacheBytes: capColumns * n * 8, precision: 'float64' });
          const rowAt = Int32Array.from(all); // position → original row, tracked independently
          for (const [i, len] of requests) cache.getQ(i, len);
          const flat = Int32Array.from(swaps.flat());
          cache.swapIndices(flat, swaps.length);
          for (const [a, b] of swaps) {
            const t = rowAt[a];
            rowAt[a] = rowAt[b];
            rowAt[b] = t;
          }
          for (const [i, len] of requests) {
            const col = cache.getQ(i, len);
            for (let j = 0; j < len; j++) {
              // reference: Q recomputed from the original rows now at positions i and j
              expect(col[j]).toBeCloseTo(directQ(spec, X, y, rowAt[i], rowAt[j]), 12);
            }
            expect(cache.QD[i]).toBeCloseTo(1, 15); // RBF diagonal
          }
        },
      ),
      { numRuns: 60 },
    );
  });
});
