import { describe, expect, it } from 'vitest';
import { computeStandings, countStandings, flagNames, standingAt } from '@/lib/margin/standings';
import { fitMargins } from '@/lib/margin/model';
import { EngineInputError } from '@/lib/margin/types';
import { fourPoints } from './hand-worked';

describe('standings arithmetic (hand-worked, given hyperplane)', () => {
  // Hyperplane f(x) = 2x₁ − 2: w = (2, 0), b = −2, ‖w‖ = 2, margin half-width 1/‖w‖ = 0.5.
  // C = 1 for every sample.
  const pts: [number, number, 1 | -1, number][] = [
    [1.5, 0, 1, 0.3], //   P1 f = 1     margin 1      distance 0.5    slack 0     free SV, no flags
    [1.1, 2, 1, 1], //     P2 f = 0.2   margin 0.2    distance 0.1    slack 0.8   bound; inside-margin, near-boundary
    [0.75, -1, 1, 1], //   P3 f = −0.5  margin −0.5   distance −0.25  slack 1.5   bound; wrong-side, near-boundary (band inclusive)
    [3, 0, -1, 1], //      P4 f = 4     margin −4     distance 2      slack 5     bound; wrong-side
    [0, 5, -1, 0], //      P5 f = −2    margin 2      distance −1     slack 0     not an SV, no flags
    [0.5004, 0, -1, 0], // P6 f = −0.9992 margin 0.9992 ≥ 1 − 1e-3: on the margin up to tolerance, no flags; slack 0.0008
    [0.51, 0, -1, 0], //   P7 f = −0.98 margin 0.98 < 0.999: inside-margin; slack 0.02
  ];
  const y = Int8Array.from(pts.map((p) => p[2]));
  const decision = Float64Array.from(pts.map((p) => 2 * p[0] - 2));
  const alpha = Float64Array.from(pts.map((p) => p[3]));
  const s = computeStandings({ y, decision, alpha, upperBound: new Float64Array(pts.length).fill(1), wNorm: 2 }, { pivots: [0] });

  it('decision, margin, distance, slack', () => {
    const exp = [
      [1, 1, 0.5, 0],
      [0.2, 0.2, 0.1, 0.8],
      [-0.5, -0.5, -0.25, 1.5],
      [4, -4, 2, 5],
      [-2, 2, -1, 0],
      [-0.9992, 0.9992, -0.4996, 0.0008],
      [-0.98, 0.98, -0.49, 0.02],
    ];
    exp.forEach(([f, m, d, sl], i) => {
      expect(s.decision[i]).toBeCloseTo(f, 12);
      expect(s.margin[i]).toBeCloseTo(m, 12);
      expect(s.distance[i]).toBeCloseTo(d, 12);
      expect(s.slack[i]).toBeCloseTo(sl, 12);
    });
  });

  it('flags and support kinds', () => {
    expect(Array.from(s.flags, (f) => flagNames(f))).toEqual([
      ['pivot'],
      ['inside-margin', 'near-boundary'],
      ['wrong-side', 'near-boundary'],
      ['wrong-side'],
      [],
      [],
      ['inside-margin'],
    ]);
    expect([0, 1, 4].map((i) => standingAt(s, i).support)).toEqual(['free', 'bound', 'none']);
    expect(countStandings(s)).toEqual({ samples: 7, support: 4, free: 1, bound: 3, wrongSide: 2, insideMargin: 2, nearBoundary: 2, pivot: 1 });
  });

  it('the near-boundary band scales with the margin half-width', () => {
    // nearBand 0.1: |f| ≤ 0.1 — none of the samples (smallest |f| is 0.2).
    const narrow = computeStandings({ y, decision, alpha, upperBound: new Float64Array(7).fill(1), wNorm: 2 }, { nearBand: 0.1 });
    expect(countStandings(narrow).nearBoundary).toBe(0);
  });
});

describe('fitMargins on the hand-worked four points', () => {
  it('SMO soft margin with C = 10 reproduces the max-margin hyperplane (α = ½ < C)', () => {
    const r = fitMargins(fourPoints, { kernel: { type: 'linear' }, C: 10, solver: 'smo', scale: 'none', seed: 1, tol: 1e-8 });
    expect(r.classes).toEqual(['neg', 'pos']);
    const b = r.boundaries[0];
    expect(b.name).toBe('pos vs neg');
    expect(Array.from(b.y)).toEqual([-1, -1, 1, 1]); // y = +1 means classes[1] = "pos"
    expect(b.solution.w?.[0]).toBeCloseTo(1, 6);
    expect(b.solution.w?.[1]).toBeCloseTo(0, 6);
    expect(b.solution.b).toBeCloseTo(-1, 6);
    expect(b.marginWidth).toBeCloseTo(2, 6);
    expect(b.solution.dualObjective).toBeCloseTo(0.5, 6);
    const expected = [
      // f, margin, distance, alpha
      [-1, 1, -1, 0.5],
      [-2, 2, -2, 0],
      [1, 1, 1, 0.5],
      [2, 2, 2, 0],
    ];
    expected.forEach(([f, m, d, a], i) => {
      expect(r.samples.decision[i]).toBeCloseTo(f, 6);
      expect(r.samples.margin[i]).toBeCloseTo(m, 6);
      expect(r.samples.distance[i]).toBeCloseTo(d, 6);
      expect(r.samples.alpha[i]).toBeCloseTo(a, 6);
    });
    expect(Array.from(b.standings.support)).toEqual([1, 0, 1, 0]); // A, C free; B, D not SVs
    expect(b.counts.wrongSide + b.counts.insideMargin + b.counts.nearBoundary).toBe(0);
    expect(b.separable).toBe(true); // every y·f > 0: the fitted hyperplane is a separation certificate
  });

  it('hard-margin mode gives the same hyperplane with the separability certificate', () => {
    const r = fitMargins(fourPoints, { kernel: { type: 'linear' }, C: Infinity, hard: true, solver: 'smo', scale: 'none', seed: 1 });
    const b = r.boundaries[0];
    expect(b.hardMargin?.separable).toBe(true);
    expect(b.separable).toBe(true);
    expect(b.marginWidth).toBeCloseTo(2, 4);
    expect(r.samples.decision[0]).toBeCloseTo(-1, 4);
    expect(r.samples.decision[2]).toBeCloseTo(1, 4);
  });

  it('the DCD solver states its formulation (regularised bias)', () => {
    const r = fitMargins(fourPoints, { kernel: { type: 'linear' }, C: 10, solver: 'dcd', scale: 'none', seed: 1 });
    expect(r.boundaries[0].formulation).toBe('dcd-regularised-bias');
    expect(r.boundaries[0].counts.wrongSide).toBe(0);
  });

  it('rejects invalid combinations with clear messages (no fallback)', () => {
    const base = { C: 1, scale: 'none', seed: 1 } as const;
    expect(() => fitMargins(fourPoints, { ...base, kernel: { type: 'rbf', gamma: 1 }, solver: 'dcd' })).toThrow(
      new EngineInputError('solver dcd solves the linear kernel only; use solver smo for the rbf kernel'),
    );
    expect(() => fitMargins(fourPoints, { ...base, kernel: { type: 'linear' }, solver: 'smo', loss: 'squared-hinge' })).toThrow(
      new EngineInputError('the squared hinge loss needs solver dcd'),
    );
    expect(() => fitMargins(fourPoints, { ...base, kernel: { type: 'linear' }, solver: 'dcd', hard: true })).toThrow(
      new EngineInputError('hard-margin mode runs its exact separability test and SMO with C = ∞; it needs solver smo, not dcd'),
    );
    expect(() => fitMargins(fourPoints, { ...base, kernel: { type: 'linear' }, solver: 'smo', C: 0 })).toThrow(
      new EngineInputError('C must be a positive finite number, got 0'),
    );
    const oneClass = { ...fourPoints, labels: ['a', 'a', 'a', 'a'] };
    expect(() => fitMargins(oneClass, { ...base, kernel: { type: 'linear' }, solver: 'smo' })).toThrow(
      new EngineInputError('only one class ("a"); at least two classes are needed'),
    );
    const dup = { ...fourPoints, ids: ['A', 'B', 'A', 'D'] };
    expect(() => fitMargins(dup, { ...base, kernel: { type: 'linear' }, solver: 'smo' })).toThrow(new EngineInputError('duplicate sample id "A"'));
    const nan = { ...fourPoints, X: { data: Float64Array.from([0, 0, -1, NaN, 2, 0, 3, 1]), rows: 4, cols: 2 } };
    expect(() => fitMargins(nan, { ...base, kernel: { type: 'linear' }, solver: 'smo' })).toThrow(
      new EngineInputError('feature 2 of sample "B" (row 2) is not finite (NaN)'),
    );
  });
});
