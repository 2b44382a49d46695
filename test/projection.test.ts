// The Boundary screen's 2-D picture (lib/projection.ts): signed distance across, the leading
// principal direction orthogonal to w up.
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { boundaryPicture, leadingDirection } from '@/lib/projection';

const S2 = Math.SQRT2;

describe('hand-worked 3-D case', () => {
  // hand-worked: w = (1, 1, 0), b = 0, ‖w‖ = √2, ŵ = (1, 1, 0)/√2. Rows (mean 0):
  //   p1 = ( 1, −1,  0)   w·p = 0     component along ŵ 0        → remainder ( 1, −1,  0)
  //   p2 = (−1,  1,  0)   w·p = 0                     0        → remainder (−1,  1,  0)
  //   p3 = ( 2,  2,  1)   w·p = 4                     4/√2     → remainder ( 0,  0,  1)
  //   p4 = (−2, −2, −1)   w·p = −4                   −4/√2     → remainder ( 0,  0, −1)
  // Covariance of the remainders (÷4): along e = (1, −1, 0)/√2 the squared lengths 2 + 2 → 1;
  // along z 1 + 1 → 0.5. So v = (1, −1, 0)/√2 (first non-zero component positive), variance 1,
  // share 1/(1 + 0.5) = 2/3.
  //   x = f/‖w‖: p1 0, p2 0, p3 4/√2 = 2√2, p4 −2√2
  //   y = p·v:   p1 2/√2 = √2, p2 −√2, p3 (2 − 2)/√2 = 0, p4 0
  // Without removing w (plain PCA, the kernel stand-in) the top direction is (2, 2, 1)/3 (squared
  // lengths 9 + 9 of p3, p4 against 2 + 2 of p1, p2): y(p3) = (4 + 4 + 1)/3 = 3, y(p1) = 0.
  const data = Float64Array.from([1, -1, 0, -1, 1, 0, 2, 2, 1, -2, -2, -1]);
  const X = { data, rows: 4, cols: 3 };
  const w = Float64Array.from([1, 1, 0]);
  const decision = [0, 0, 4, -4];

  it('linear fit: distance across, principal direction orthogonal to w up', () => {
    const p = boundaryPicture(X, decision, S2, w);
    expect(p.vertical).toBe('orthogonal-to-w');
    expect(p.band).toBeCloseTo(1 / S2, 12);
    expect(Array.from(p.x)).toEqual([0, 0, 4 / S2, -4 / S2].map((v) => expect.closeTo(v, 12)));
    expect(Array.from(p.direction.v).map((v) => Math.abs(v) < 1e-12 ? 0 : v)).toEqual([1 / S2, -1 / S2, 0].map((v) => (v === 0 ? 0 : expect.closeTo(v, 10))));
    expect(Array.from(p.y)).toEqual([S2, -S2, 0, 0].map((v) => expect.closeTo(v, 10)));
    expect(p.direction.variance).toBeCloseTo(1, 10);
    expect(p.direction.share).toBeCloseTo(2 / 3, 10);
  });

  it('kernel stand-in: plain leading principal direction of the inputs', () => {
    const p = boundaryPicture(X, decision, S2, null);
    expect(p.vertical).toBe('input-pca');
    expect(Array.from(p.direction.v)).toEqual([2 / 3, 2 / 3, 1 / 3].map((v) => expect.closeTo(v, 10)));
    expect(p.y[2]).toBeCloseTo(3, 10);
    expect(p.y[0]).toBeCloseTo(0, 10);
  });

  it('2-D case: the only direction orthogonal to w', () => {
    // hand-worked: w = (3, 4), ‖w‖ = 5; the orthogonal unit direction is ±(4, −3)/5, sign rule → (0.8, −0.6).
    // Rows (0, 0), (4, −3), (−4, 3): mean 0, y = p·v = 0, 5, −5.
    const q = boundaryPicture({ data: Float64Array.from([0, 0, 4, -3, -4, 3]), rows: 3, cols: 2 }, [1, 1, 1], 5, Float64Array.from([3, 4]));
    expect(Array.from(q.direction.v)).toEqual([expect.closeTo(0.8, 10), expect.closeTo(-0.6, 10)]);
    expect(Array.from(q.y)).toEqual([0, 5, -5].map((v) => expect.closeTo(v, 10)));
    expect(Array.from(q.x)).toEqual([0.2, 0.2, 0.2].map((v) => expect.closeTo(v, 12)));
  });
});

describe('properties', () => {
  it('the vertical direction is a unit vector orthogonal to w', () => {
    fc.assert(
      fc.property(
        fc.integer({ min: 2, max: 6 }),
        fc.integer({ min: 3, max: 25 }),
        fc.integer({ min: 1, max: 1_000_000 }),
        (d, n, seed) => {
          // deterministic pseudo-random values from the seed (sine hash; each entry independent)
          const val = (k: number) => {
            const s = Math.sin((seed + k) * 12.9898) * 43758.5453;
            return (s - Math.floor(s)) * 4 - 2;
          };
          const data = Float64Array.from({ length: n * d }, (_, k) => val(k));
          const w = Float64Array.from({ length: d }, (_, j) => val(10_000 + j) + (j === 0 ? 3 : 0));
          const dir = leadingDirection({ data, rows: n, cols: d }, w);
          let dot = 0;
          let len = 0;
          let wn = 0;
          for (let j = 0; j < d; j++) {
            dot += dir.v[j] * w[j];
            len += dir.v[j] * dir.v[j];
            wn += w[j] * w[j];
          }
          expect(Math.abs(dot) / Math.sqrt(wn)).toBeLessThan(1e-9);
          expect(len).toBeCloseTo(1, 9);
          expect(dir.share).toBeGreaterThanOrEqual(0);
          expect(dir.share).toBeLessThanOrEqual(1 + 1e-12);
        },
      ),
      { numRuns: 60 },
    );
  });

  it('subsampling for the direction still projects every row', () => {
    const n = 50;
    const data = Float64Array.from({ length: n * 2 }, (_, k) => (k % 2 === 0 ? k : 0));
    const p = boundaryPicture({ data, rows: n, cols: 2 }, new Array<number>(n).fill(0), 1, Float64Array.from([0, 1]), 10);
    expect(p.y.length).toBe(n);
    // hand-worked: w along the second axis, so v = (1, 0) and y is the centred first coordinate: spacing 2 between rows
    expect(p.y[1] - p.y[0]).toBeCloseTo(2, 10);
  });
});
