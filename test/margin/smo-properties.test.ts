/**
 * Property tests of the SMO solver on small random problems (fast-check). The checked facts are the
 * Karush–Kuhn–Tucker conditions of the C-SVM dual and weak duality (textbook facts; e.g. Chang & Lin,
 * LIBSVM 2011, §4.1; Fan, Chen & Lin 2005, §2): at an ε-optimal point with m(α) − M(α) < ε,
 *   0 ≤ αᵢ ≤ Cᵢ, Σαᵢyᵢ = 0,
 *   αᵢ = 0 ⇒ yᵢf(xᵢ) ≥ 1 − ε,  0 < αᵢ < Cᵢ ⇒ |yᵢf(xᵢ) − 1| ≤ ε,  αᵢ = Cᵢ ⇒ yᵢf(xᵢ) ≤ 1 + ε,
 * and the duality gap P − D is ≥ 0 and at most ε·ΣCᵢ (each sample contributes at most ε·Cᵢ).
 */
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { decisionValues } from '@/lib/margin/kernel';
import { solveSmo } from '@/lib/margin/smo';
import type { BinaryProblem, BinarySolution, KernelSpec } from '@/lib/margin/types';

const TOL = 1e-6;
const SLACK = 1e-7; // rounding allowance on top of the stopping tolerance

const coordinate = fc.integer({ min: -300, max: 300 }).map((v) => v / 100);

/** Random problem with n ∈ [2, 24] rows, d ∈ [1, 4] columns and both classes present. */
const problemArb: fc.Arbitrary<BinaryProblem> = fc
  .record({ n: fc.integer({ min: 2, max: 24 }), d: fc.integer({ min: 1, max: 4 }) })
  .chain(({ n, d }) =>
    fc.record({
      data: fc.array(coordinate, { minLength: n * d, maxLength: n * d }),
      labels: fc.array(fc.boolean(), { minLength: n, maxLength: n }),
      n: fc.constant(n),
      d: fc.constant(d),
    }),
  )
  .map(({ data, labels, n, d }) => {
    const y = Int8Array.from(labels.map((b) => (b ? 1 : -1)));
    y[0] = 1;
    y[1] = -1;
    return { X: { data: Float64Array.from(data), rows: n, cols: d }, y };
  });

const kernelArb: fc.Arbitrary<KernelSpec> = fc.oneof(
  fc.constant<KernelSpec>({ type: 'linear' }),
  fc.double({ min: 0.05, max: 3, noNaN: true }).map((gamma): KernelSpec => ({ type: 'rbf', gamma })),
  fc.constant<KernelSpec>({ type: 'poly', gamma: 0.5, degree: 2, coef0: 1 }),
);

const cArb = fc.constantFrom(0.05, 1, 20);

function checkKkt(p: BinaryProblem, s: BinarySolution): void {
  const n = p.X.rows;
  let sumAy = 0;
  let sumA = 0;
  let sumC = 0;
  for (let i = 0; i < n; i++) {
    const a = s.alpha[i];
    const Ci = s.upperBound[i];
    expect(a).toBeGreaterThanOrEqual(0);
    expect(a).toBeLessThanOrEqual(Ci);
    sumAy += a * p.y[i];
    sumA += a;
    if (Ci === 0) continue; // excluded sample: no condition
    sumC += Ci;
    const m = p.y[i] * s.decision[i];
    const scale = 1 + Math.abs(s.decision[i]);
    if (a === 0) expect(m).toBeGreaterThanOrEqual(1 - TOL - SLACK * scale);
    else if (a === Ci) expect(m).toBeLessThanOrEqual(1 + TOL + SLACK * scale);
    else expect(Math.abs(m - 1)).toBeLessThanOrEqual(TOL + SLACK * scale);
  }
  expect(Math.abs(sumAy)).toBeLessThanOrEqual(1e-9 * Math.max(1, sumA));
  expect(s.dualityGap).toBeGreaterThanOrEqual(-1e-9);
  expect(s.dualityGap).toBeLessThanOrEqual(TOL * sumC + 1e-7);
  expect(Math.abs(s.primalObjective - s.dualObjective - s.dualityGap)).toBeLessThanOrEqual(1e-7 * (1 + Math.abs(s.primalObjective)));
  expect(s.maxKktViolation).toBeLessThan(TOL);
}

describe('SMO properties on random small problems', () => {
  it('KKT conditions and weak duality hold at the returned solution', () => {
    fc.assert(
      fc.property(problemArb, kernelArb, cArb, (p, kernel, C) => {
        const s = solveSmo(p, { kernel, C, tol: TOL });
        expect(s.converged).toBe(true);
        checkKkt(p, s);
      }),
      { numRuns: 150 },
    );
  });

  it('KKT conditions hold with class weights and per-sample bounds (including excluded samples)', () => {
    fc.assert(
      fc.property(
        problemArb,
        kernelArb,
        fc.array(fc.constantFrom(0, 0.1, 1, 5), { minLength: 24, maxLength: 24 }),
        (p, kernel, bounds) => {
          const upperBound = Float64Array.from({ length: p.X.rows }, (_, i) => bounds[i]);
          upperBound[0] = Math.max(upperBound[0], 0.1); // keep both classes in the problem
          upperBound[1] = Math.max(upperBound[1], 0.1);
          const s = solveSmo(p, { kernel, C: 1, upperBound, tol: TOL });
          checkKkt(p, s);
          // excluded samples get out-of-sample decision values from the fitted model
          const f = decisionValues(p, s, p.X);
          for (let i = 0; i < p.X.rows; i++) expect(Math.abs(f[i] - s.decision[i])).toBeLessThan(1e-7 * (1 + Math.abs(f[i])));
        },
      ),
      { numRuns: 100 },
    );
  });

  it('shrinking on/off and warm starts from arbitrary α reach the same optimum', () => {
    fc.assert(
      fc.property(
        problemArb,
        kernelArb,
        cArb,
        fc.array(fc.double({ min: 0, max: 50, noNaN: true }), { minLength: 24, maxLength: 24 }),
        (p, kernel, C, start) => {
          const a = solveSmo(p, { kernel, C, tol: TOL });
          const b = solveSmo(p, { kernel, C, tol: TOL, shrinking: false });
          const warm = solveSmo(p, { kernel, C, tol: TOL, warmStart: Float64Array.from(start.slice(0, p.X.rows)) });
          checkKkt(p, warm);
          // two ε-optimal points differ in dual value by at most the larger duality gap
          const allowance = Math.max(a.dualityGap, b.dualityGap, warm.dualityGap) + 1e-9;
          expect(Math.abs(a.dualObjective - b.dualObjective)).toBeLessThanOrEqual(allowance);
          expect(Math.abs(a.dualObjective - warm.dualObjective)).toBeLessThanOrEqual(allowance);
        },
      ),
      { numRuns: 100 },
    );
  });

  it('hard margin (C = ∞) on separable data: every sample at functional margin ≥ 1 − ε', () => {
    // data labelled by a random hyperplane, points within 0.2 of it dropped: linearly separable
    fc.assert(
      fc.property(
        fc.array(fc.tuple(coordinate, coordinate), { minLength: 4, maxLength: 30 }),
        fc.tuple(coordinate, coordinate, coordinate),
        (points, [w0, w1, b]) => {
          fc.pre(Math.hypot(w0, w1) > 0.1);
          const norm = Math.hypot(w0, w1);
          const kept = points.filter(([u, v]) => Math.abs(w0 * u + w1 * v + b) / norm > 0.2);
          const labels = kept.map(([u, v]) => (w0 * u + w1 * v + b > 0 ? 1 : -1));
          fc.pre(labels.includes(1) && labels.includes(-1));
          const p: BinaryProblem = { X: { data: Float64Array.from(kept.flat()), rows: kept.length, cols: 2 }, y: Int8Array.from(labels) };
          const s = solveSmo(p, { kernel: { type: 'linear' }, C: Infinity, tol: TOL });
          expect(s.converged).toBe(true);
          for (let i = 0; i < p.X.rows; i++) expect(p.y[i] * s.decision[i]).toBeGreaterThanOrEqual(1 - TOL - SLACK * (1 + Math.abs(s.decision[i])));
          // the optimal margin is at least the separating hyperplane's: 1/‖w*‖ ≥ min distance to (w0, w1, b)
          let minDist = Infinity;
          kept.forEach(([u, v]) => (minDist = Math.min(minDist, Math.abs(w0 * u + w1 * v + b) / norm)));
          expect(1 / Math.sqrt(s.wNormSquared)).toBeGreaterThanOrEqual(minDist * (1 - 1e-4));
        },
      ),
      { numRuns: 100 },
    );
  });
});
