/**
 * Nearest neighbours (lib/server/queue/neighbours.ts): a hand-worked 2-D case for each scaling, and
 * properties against a plain reference — every distance computed from its definition, all rows
 * sorted by (distance, row) — on random matrices whose column counts exercise the four-way sums,
 * their tails and the early stop of the partial distance search.
 */
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { nearestNeighbours, nearestNeighboursOfRows, type MatrixView, type Scaling } from '@/lib/server/queue/neighbours';

let views = 0;
function view(rows: number[][]): MatrixView {
  const cols = rows[0]?.length ?? 0;
  // A fresh fingerprint per matrix: the prepared weights are cached by project and fingerprint.
  return { projectId: 'p', fingerprint: `t${views++}`, X: Float32Array.from(rows.flat()), rows: rows.length, cols };
}

/** Distances from their definitions, in double precision, on the float32 values the matrix holds. */
function referenceDistances(m: MatrixView, scaling: Scaling, q: number): number[] {
  const { X, rows: n, cols: d } = m;
  const at = (i: number, j: number) => X[i * d + j];
  const scaled: number[][] = [];
  if (scaling === 'standard') {
    const mean = Array.from({ length: d }, (_, j) => Array.from({ length: n }, (_, i) => at(i, j)).reduce((s, v) => s + v, 0) / n);
    const sd = mean.map((mu, j) => Math.sqrt(Array.from({ length: n }, (_, i) => (at(i, j) - mu) ** 2).reduce((s, v) => s + v, 0) / n));
    for (let i = 0; i < n; i++) scaled.push(Array.from({ length: d }, (_, j) => (sd[j] > 0 ? (at(i, j) - mean[j]) / sd[j] : 0)));
  } else if (scaling === 'l2') {
    for (let i = 0; i < n; i++) {
      const norm = Math.sqrt(Array.from({ length: d }, (_, j) => at(i, j) ** 2).reduce((s, v) => s + v, 0));
      scaled.push(Array.from({ length: d }, (_, j) => (norm > 0 ? at(i, j) / norm : 0)));
    }
  } else {
    for (let i = 0; i < n; i++) scaled.push(Array.from({ length: d }, (_, j) => at(i, j)));
  }
  return scaled.map((x) => Math.sqrt(x.reduce((s, v, j) => s + (v - scaled[q][j]) ** 2, 0)));
}

function reference(m: MatrixView, scaling: Scaling, q: number, k: number): { row: number; distance: number }[] {
  const dist = referenceDistances(m, scaling, q);
  return dist
    .map((distance, row) => ({ row, distance }))
    .filter((x) => x.row !== q)
    .sort((a, b) => a.distance - b.distance || a.row - b.row)
    .slice(0, k);
}

describe('nearest neighbours, hand-worked', () => {
  // Points (0,0) (3,4) (1,0) (0,2) (6,8); distances worked out by hand below.
  const points = [
    [0, 0],
    [3, 4],
    [1, 0],
    [0, 2],
    [6, 8],
  ];

  it('none: plain Euclidean distances 1, 2, 5, 10 from the origin', () => {
    const found = nearestNeighbours(view(points), 'none', 0, 5);
    expect(found.map((x) => x.row)).toEqual([2, 3, 1, 4]);
    expect(found.map((x) => x.distance)).toEqual([1, 2, 5, 10]);
  });

  it('l2: directions only; (3,4) and (6,8) coincide, the zero row is the origin at distance 1', () => {
    const found = nearestNeighbours(view(points), 'l2', 1, 4);
    expect(found.map((x) => x.row)).toEqual([4, 3, 2, 0]);
    // (0.6,0.8) to (0,1): √(0.36 + 0.04) = √0.4; to (1,0): √(0.16 + 0.64) = √0.8; to the origin: 1.
    const expected = [0, Math.sqrt(0.4), Math.sqrt(0.8), 1];
    found.forEach((x, i) => expect(x.distance).toBeCloseTo(expected[i], 6));
    // From a zero row every other row is at distance 1 (axis directions, exact in floating point):
    // ties go to the lower row.
    const axes = nearestNeighbours(view([[0, 0], [0, 2], [1, 0], [0, -3], [4, 0]]), 'l2', 0, 4);
    expect(axes).toEqual([1, 2, 3, 4].map((row) => ({ row, distance: 1 })));
  });

  it('standard: z-scores with population standard deviations (x: mean 2, var 5.2; y: mean 2.8, var 8.96)', () => {
    const sx = Math.sqrt(5.2);
    const sy = Math.sqrt(8.96);
    const found = nearestNeighbours(view(points), 'standard', 0, 4);
    expect(found.map((x) => x.row)).toEqual([2, 3, 1, 4]);
    const expected = [1 / sx, 2 / sy, Math.hypot(3 / sx, 4 / sy), Math.hypot(6 / sx, 8 / sy)];
    found.forEach((x, i) => expect(x.distance).toBeCloseTo(expected[i], 6));
  });

  it('asks for more neighbours than there are rows, or none', () => {
    expect(nearestNeighbours(view(points), 'none', 0, 10)).toHaveLength(4);
    expect(nearestNeighbours(view(points), 'none', 0, 0)).toEqual([]);
  });
});

describe('nearest neighbours, properties', () => {
  const scalings: Scaling[] = ['standard', 'l2', 'none'];

  const matrix = (values: fc.Arbitrary<number>) =>
    fc
      .tuple(fc.integer({ min: 2, max: 30 }), fc.integer({ min: 1, max: 70 }))
      .chain(([n, d]) => fc.tuple(fc.constant(d), fc.array(fc.array(values, { minLength: d, maxLength: d }), { minLength: n, maxLength: n })));

  it('small integers (exact arithmetic, many ties): the same rows and distances as the reference, ties by row', () => {
    fc.assert(
      fc.property(matrix(fc.integer({ min: -3, max: 3 })), fc.nat(), fc.integer({ min: 1, max: 8 }), ([, rows], qSeed, k) => {
        const m = view(rows);
        const q = qSeed % rows.length;
        const found = nearestNeighbours(m, 'none', q, k);
        const want = reference(m, 'none', q, k);
        expect(found.map((x) => x.row)).toEqual(want.map((x) => x.row));
        found.forEach((x, i) => expect(x.distance).toBeCloseTo(want[i].distance, 9));
      }),
      { numRuns: 300 },
    );
  });

  it('real values, every scaling, several queries in one pass: each answer is a true k-nearest set', () => {
    fc.assert(
      fc.property(
        matrix(fc.double({ min: -10, max: 10, noNaN: true })),
        fc.array(fc.nat(), { minLength: 1, maxLength: 4 }),
        fc.integer({ min: 1, max: 6 }),
        fc.constantFrom(...scalings),
        ([, rows], qSeeds, k, scaling) => {
          const m = view(rows);
          const queries = qSeeds.map((s) => s % rows.length);
          const answers = nearestNeighboursOfRows(m, scaling, queries, k);
          queries.forEach((q, t) => {
            const found = answers[t];
            const want = reference(m, scaling, q, k);
            const truth = referenceDistances(m, scaling, q);
            expect(found).toHaveLength(want.length);
            expect(new Set(found.map((x) => x.row)).size).toBe(found.length);
            found.forEach((x, i) => {
              expect(x.row).not.toBe(q);
              // Each reported distance is the row's true distance, and the i-th is the i-th smallest
              // (rows may swap only between distances equal up to rounding).
              expect(x.distance).toBeCloseTo(truth[x.row], 6);
              expect(x.distance).toBeCloseTo(want[i].distance, 6);
            });
          });
        },
      ),
      { numRuns: 300 },
    );
  });
});
