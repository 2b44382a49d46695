import { describe, expect, it } from 'vitest';
import { fitMargins, type LabelledData } from '@/lib/margin/model';
import { computePivots, marginWidthOf } from '@/lib/margin/pivots';
import { solveSmo } from '@/lib/margin/smo';
import { binarySubset, loadBreastCancer, standardise } from './datasets';
import { fourPoints } from './hand-worked';

describe('pivots on the hand-worked four points', () => {
  // Full fit (hand-worked in hand-worked.ts): margin width 2, support vectors A and C (α = ½ each).
  // Without A: the negatives are {B}; the hull distance is then |B − C| = |(−1, 0) − (2, 0)| = 3
  //   (the point of CD nearest to B is C: ((B − C)·(D − C))/2 = ((−3, 0)·(1, 1))/2 < 0), so the width
  //   becomes 3: Δ = +1, relative +50 %.
  // Without C: the positives are {D}; the point of AB nearest to D = (3, 1) is A (the projection
  //   parameter ((D − A)·(B − A))/‖B − A‖² = −3 is clamped to 0), so the width becomes |D − A| = √10
  //   ≈ 3.1623: Δ = √10 − 2 ≈ 1.1623, relative ≈ +58.1 %.
  // B and D are not support vectors: never refitted (their removal changes nothing — textbook fact).
  const check = (hard: boolean) => {
    const r = fitMargins(fourPoints, {
      kernel: { type: 'linear' },
      C: hard ? Infinity : 10,
      hard,
      solver: 'smo',
      scale: 'none',
      seed: 1,
      tol: 1e-8,
    });
    const p = r.boundaries[0].pivots;
    expect(p).not.toBeNull();
    if (!p) return;
    expect(p.supportCount).toBe(2);
    expect(p.skipped).toEqual([]);
    const byIndex = new Map(p.computed.map((e) => [e.index, e]));
    expect([...byIndex.keys()].sort()).toEqual([0, 2]); // A and C only
    expect(byIndex.get(0)?.marginWidthWithout).toBeCloseTo(3, 4);
    expect(byIndex.get(0)?.relativeDelta).toBeCloseTo(0.5, 4);
    expect(byIndex.get(2)?.marginWidthWithout).toBeCloseTo(Math.sqrt(10), 4);
    expect(byIndex.get(2)?.deltaWidth).toBeCloseTo(Math.sqrt(10) - 2, 4);
    expect(p.pivots).toEqual([0, 2]); // both swing the margin by far more than 5 %
    expect(Array.from(r.samples.flags, (f) => (f & 8) !== 0)).toEqual([true, false, true, false]);
  };
  it('soft margin (C = 10, same solution as the hard margin since α = ½ < C)', () => check(false));
  it('hard margin', () => check(true));
});

describe('removing a non-support vector changes nothing (textbook fact)', () => {
  // Malignant vs benign on the first 200 rows of the UCI breast cancer data, standardised.
  const bc = loadBreastCancer();
  const sub = binarySubset({ ...bc, X: standardise(bc.X) }, 0, [0, 1]);
  const n = 200;
  const X = { data: sub.X.data.slice(0, n * sub.X.cols), rows: n, cols: sub.X.cols };
  const y = sub.y.slice(0, n);
  const full = solveSmo({ X, y }, { kernel: { type: 'linear' }, C: 1, tol: 1e-7 });
  const nonSv: number[] = [];
  for (let i = 0; i < n && nonSv.length < 3; i++) if (full.alpha[i] === 0) nonSv.push(i);

  it('refitting without the sample (Cᵢ = 0) gives the same w, b and margin width', () => {
    expect(nonSv.length).toBe(3);
    for (const i of nonSv) {
      const ub = new Float64Array(n).fill(1);
      ub[i] = 0;
      const without = solveSmo({ X, y }, { kernel: { type: 'linear' }, C: 1, tol: 1e-7, upperBound: ub });
      expect(Math.abs(without.b - full.b)).toBeLessThan(1e-4);
      const w0 = full.w as Float64Array;
      const w1 = without.w as Float64Array;
      let diff = 0;
      let norm = 0;
      for (let j = 0; j < w0.length; j++) {
        diff = Math.max(diff, Math.abs(w1[j] - w0[j]));
        norm = Math.max(norm, Math.abs(w0[j]));
      }
      expect(diff / norm).toBeLessThan(1e-4);
      expect(marginWidthOf(without) / marginWidthOf(full)).toBeCloseTo(1, 5);
    }
  });

  it('fitting on the data with the row deleted gives the same hyperplane', () => {
    const i = nonSv[0];
    const keep = Array.from({ length: n }, (_, r) => r).filter((r) => r !== i);
    const data: LabelledData = {
      ids: keep.map(String),
      labels: keep.map((r) => (y[r] > 0 ? 'malignant' : 'benign')),
      X: { data: Float64Array.from(keep.flatMap((r) => Array.from(X.data.subarray(r * X.cols, (r + 1) * X.cols)))), rows: keep.length, cols: X.cols },
    };
    // scale 'none': the data are already standardised, so removing a row does not move the scaling.
    const r = fitMargins(data, { kernel: { type: 'linear' }, C: 1, solver: 'smo', scale: 'none', seed: 1, tol: 1e-7, pivotCap: 0 });
    expect(Math.abs(r.boundaries[0].solution.b - full.b)).toBeLessThan(1e-4);
    expect(r.boundaries[0].marginWidth / marginWidthOf(full)).toBeCloseTo(1, 5);
  });

  it('computePivots refits only support vectors, most influential (largest α) first, up to the cap', () => {
    const refitted: number[] = [];
    const report = computePivots(
      full,
      (i, warm) => {
        refitted.push(i);
        expect(warm[i]).toBe(0); // warm start: the full α with αᵢ = 0
        const ub = new Float64Array(n).fill(1);
        ub[i] = 0;
        return solveSmo({ X, y }, { kernel: { type: 'linear' }, C: 1, tol: 1e-7, upperBound: ub, warmStart: warm });
      },
      { cap: 5 },
    );
    const sv = Array.from(full.alpha.keys()).filter((i) => full.alpha[i] > 0);
    expect(report.supportCount).toBe(sv.length);
    expect(refitted.length).toBe(5);
    for (const i of refitted) expect(full.alpha[i]).toBeGreaterThan(0);
    const alphas = refitted.map((i) => full.alpha[i]);
    for (let k = 1; k < alphas.length; k++) expect(alphas[k]).toBeLessThanOrEqual(alphas[k - 1]);
    expect(report.skipped.length).toBe(sv.length - 5);
    expect(new Set([...refitted, ...report.skipped])).toEqual(new Set(sv));
    for (const e of report.computed) expect(e.relativeDelta).toBeCloseTo(e.deltaWidth / report.marginWidth, 12);
  });
});
