import { describe, expect, it } from 'vitest';
import { decisionValues } from '@/lib/margin/kernel';
import { solveSmo, type SmoOptions } from '@/lib/margin/smo';
import type { BinaryProblem, BinarySolution, DenseRows, SolverProgress } from '@/lib/margin/types';
import { EngineInputError, FitCancelledError } from '@/lib/margin/types';
import { binarySubset, loadBreastCancer, loadIris, standardise } from './datasets';

function problem(points: number[][], labels: number[]): BinaryProblem {
  const X: DenseRows = { data: Float64Array.from(points.flat()), rows: points.length, cols: points[0].length };
  return { X, y: Int8Array.from(labels) };
}

function supportSet(s: BinarySolution): number[] {
  const out: number[] = [];
  s.alpha.forEach((a, i) => a > 0 && out.push(i));
  return out;
}

function dropRows(p: BinaryProblem, drop: Set<number>): { p: BinaryProblem; kept: number[] } {
  const kept: number[] = [];
  for (let i = 0; i < p.X.rows; i++) if (!drop.has(i)) kept.push(i);
  const d = p.X.cols;
  const data = new Float64Array(kept.length * d);
  kept.forEach((r, k) => data.set(p.X.data.subarray(r * d, (r + 1) * d), k * d));
  return { p: { X: { data, rows: kept.length, cols: d }, y: Int8Array.from(kept.map((r) => p.y[r])) }, kept };
}

describe('hand-worked 2-D hard margin', () => {
  // Positives P₁ = (2, 1), P₂ = (3, 3), P₃ = (4, 0); negatives N₁ = (0, 0), N₂ = (−1, 0), N₃ = (0, −2), N₄ = (−2, −1).
  // Claim: the maximum-margin hyperplane is determined by P₁ and N₁ alone.
  //   Perpendicular bisector of P₁N₁: direction P₁ − N₁ = (2, 1), ‖P₁ − N₁‖² = 5.
  //   Canonical scaling y(w·x + b) = 1 at both: w = 2(P₁ − N₁)/‖P₁ − N₁‖² = (0.8, 0.4);
  //   w·P₁ + b = 1.6 + 0.4 + b = 1 → b = −1;  w·N₁ + b = −1 ✓.
  //   ‖w‖² = 0.64 + 0.16 = 0.8, ‖w‖ = √0.8 = 0.894427191; margin width 2/‖w‖ = √5 = 2.236067977 (= ‖P₁ − N₁‖).
  //   Dual: w = α(P₁ − N₁) with α_{P₁} = α_{N₁} = α → α = 0.4; Σαᵢyᵢ = 0.4 − 0.4 = 0 ✓; all other α = 0.
  //   f(x) = 0.8x₁ + 0.4x₂ − 1: f(P₂) = 2.4 + 1.2 − 1 = 2.6, f(P₃) = 3.2 − 1 = 2.2,
  //   f(N₂) = −0.8 − 1 = −1.8, f(N₃) = −0.8 − 1 = −1.8, f(N₄) = −1.6 − 0.4 − 1 = −3.
  //   Every other point has yf > 1, so the KKT conditions hold and (by convexity) this is the optimum.
  //   Signed distance f/‖w‖: P₂ 2.6/0.894427191 = 2.906888371, N₄ −3/0.894427191 = −3.354101966.
  //   Objectives: primal ½‖w‖² = 0.4; dual Σα − ½‖w‖² = 0.8 − 0.4 = 0.4; gap 0.
  const p = problem(
    [[2, 1], [3, 3], [4, 0], [0, 0], [-1, 0], [0, -2], [-2, -1]],
    [1, 1, 1, -1, -1, -1, -1],
  );
  for (const C of [Infinity, 100]) {
    it(`C = ${C}: w, b, α, distances and margin match the hand computation`, () => {
      const s = solveSmo(p, { kernel: { type: 'linear' }, C, tol: 1e-9 });
      expect(s.converged).toBe(true);
      expect(s.w?.[0]).toBeCloseTo(0.8, 6); // hand-worked above
      expect(s.w?.[1]).toBeCloseTo(0.4, 6); // hand-worked above
      expect(s.b).toBeCloseTo(-1, 6); // hand-worked above
      const alphaExpected = [0.4, 0, 0, 0.4, 0, 0, 0]; // hand-worked above
      s.alpha.forEach((a, i) => expect(a).toBeCloseTo(alphaExpected[i], 6));
      const fExpected = [1, 2.6, 2.2, -1, -1.8, -1.8, -3]; // hand-worked above
      s.decision.forEach((f, i) => expect(f).toBeCloseTo(fExpected[i], 6));
      const norm = Math.sqrt(s.wNormSquared);
      expect(s.wNormSquared).toBeCloseTo(0.8, 6); // hand-worked above
      expect(2 / norm).toBeCloseTo(2.236067977, 6); // margin width √5, hand-worked above
      expect(s.decision[1] / norm).toBeCloseTo(2.906888371, 6); // distance of P₂, hand-worked above
      expect(s.decision[6] / norm).toBeCloseTo(-3.354101966, 6); // distance of N₄, hand-worked above
      expect(s.primalObjective).toBeCloseTo(0.4, 6); // hand-worked above
      expect(s.dualObjective).toBeCloseTo(0.4, 6); // hand-worked above
      expect(Math.abs(s.dualityGap)).toBeLessThan(1e-6);
      expect(s.formulation).toBe('smo-unregularised-bias');
    });
  }
});

describe('hand-worked degenerate hard margin (non-unique α, unique w and b)', () => {
  // Positives (1, 1), (2, 2), (2, 0); negatives (−1, −1), (−2, 0), (0, −2): symmetric under x → −x.
  // The hulls face each other along the parallel lines x₁ + x₂ = 2 (segment (1,1)–(2,0)) and
  // x₁ + x₂ = −2 (segment (−2,0)–(0,−2), containing (−1,−1)); their distance is 4/√2 = 2√2.
  // Hence w ∥ (1, 1), b = 0 by symmetry, and w·(1, 1) = 1 gives w = (0.5, 0.5), ‖w‖² = 0.5,
  // margin width 2/‖w‖ = 2√2 = 2.828427125. Dual value Σα − ½‖w‖² = ‖w‖² − ½‖w‖² = 0.25.
  const p = problem([[1, 1], [2, 2], [2, 0], [-1, -1], [-2, 0], [0, -2]], [1, 1, 1, -1, -1, -1]);
  it('finds w = (0.5, 0.5), b = 0', () => {
    const s = solveSmo(p, { kernel: { type: 'linear' }, C: Infinity, tol: 1e-9 });
    expect(s.w?.[0]).toBeCloseTo(0.5, 6); // hand-worked above
    expect(s.w?.[1]).toBeCloseTo(0.5, 6); // hand-worked above
    expect(s.b).toBeCloseTo(0, 6); // hand-worked above
    expect(2 / Math.sqrt(s.wNormSquared)).toBeCloseTo(2.828427125, 6); // hand-worked above
    expect(s.dualObjective).toBeCloseTo(0.25, 6); // hand-worked above
    expect(s.alpha[1]).toBe(0); // (2, 2) has yf = 2: never a support vector
  });
});

describe('hand-worked 1-D soft margin', () => {
  // x = 1 (y = +1), x = −1 (y = −1), C = 0.25. Q = [[1, 1], [1, 1]] (Q₁₂ = (+1)(−1)(1)(−1) = 1).
  // Hard margin would need α = (0.5, 0.5) > C, so both sit at the bound: α = (0.25, 0.25).
  // w = 0.25·1 − 0.25·(−1) = 0.5. G = Qα − 1 = (−0.5, −0.5); no free α, so b is the midpoint of the
  // feasible interval (LIBSVM's rule): from y₁G₁ = −0.5 (lower end) and y₂G₂ = 0.5 (upper end), ρ = 0, b = 0.
  // f(±1) = ±0.5, yf = 0.5, ξ = 0.5 each. Primal ½·0.25 + 0.25·(0.5 + 0.5) = 0.375; dual 0.5 − 0.125 = 0.375.
  it('puts both α at C and matches the objectives', () => {
    const s = solveSmo(problem([[1], [-1]], [1, -1]), { kernel: { type: 'linear' }, C: 0.25, tol: 1e-9 });
    expect(Array.from(s.alpha)).toEqual([0.25, 0.25]); // hand-worked above (bounds are exact)
    expect(s.w?.[0]).toBeCloseTo(0.5, 12);
    expect(s.b).toBeCloseTo(0, 12);
    expect(s.primalObjective).toBeCloseTo(0.375, 12);
    expect(s.dualObjective).toBeCloseTo(0.375, 12);
    expect(s.upperBound[0]).toBe(0.25);
  });
  it('class weights scale the bound per class', () => {
    // hand-worked: C₊ = 0.25·2 = 0.5, C₋ = 0.25·1; Σαᵢyᵢ = 0 forces α₊ = α₋ ≤ 0.25, so still α = (0.25, 0.25)
    const s = solveSmo(problem([[1], [-1]], [1, -1]), {
      kernel: { type: 'linear' },
      C: 0.25,
      classWeights: { positive: 2, negative: 1 },
    });
    expect(Array.from(s.upperBound)).toEqual([0.5, 0.25]);
    expect(s.alpha[0]).toBeCloseTo(0.25, 12);
  });
});

describe('input checks', () => {
  const p = problem([[0], [1]], [1, -1]);
  it('rejects one-class problems, bad labels, non-finite data and bad options', () => {
    expect(() => solveSmo(problem([[0], [1]], [1, 1]), { kernel: { type: 'linear' }, C: 1 })).toThrow(EngineInputError);
    expect(() => solveSmo(problem([[0], [1]], [1, 0]), { kernel: { type: 'linear' }, C: 1 })).toThrow(EngineInputError);
    expect(() => solveSmo(problem([[0], [Number.NaN]], [1, -1]), { kernel: { type: 'linear' }, C: 1 })).toThrow(EngineInputError);
    expect(() => solveSmo(p, { kernel: { type: 'linear' }, C: 0 })).toThrow(EngineInputError);
    expect(() => solveSmo(p, { kernel: { type: 'rbf', gamma: -1 }, C: 1 })).toThrow(EngineInputError);
    expect(() => solveSmo(p, { kernel: { type: 'linear' }, C: 1, tol: 0 })).toThrow(EngineInputError);
    expect(() => solveSmo(p, { kernel: { type: 'linear' }, C: 1, upperBound: Float64Array.of(1) })).toThrow(EngineInputError);
    // excluding every positive sample leaves one class
    expect(() => solveSmo(p, { kernel: { type: 'linear' }, C: 1, upperBound: Float64Array.of(0, 1) })).toThrow(EngineInputError);
  });
});

describe('hard margin (C = Infinity)', () => {
  it('separates Iris setosa from the other two species', () => {
    // textbook fact: Iris setosa is linearly separable from versicolor and virginica
    const p = binarySubset(loadIris(), 0, [0, 1, 2]);
    const s = solveSmo(p, { kernel: { type: 'linear' }, C: Infinity, tol: 1e-6 });
    expect(s.converged).toBe(true);
    let minMargin = Infinity;
    for (let i = 0; i < p.X.rows; i++) minMargin = Math.min(minMargin, p.y[i] * s.decision[i]);
    expect(minMargin).toBeGreaterThan(1 - 1e-5);
    expect(supportSet(s).length).toBeGreaterThanOrEqual(2);
    expect(s.dualityGap).toBeLessThan(1e-5);
  });
  it('stops at maxIterations with converged = false when the dual is unbounded (XOR)', () => {
    // textbook fact: XOR is not linearly separable, so the hard-margin dual is unbounded
    const xor = problem([[0, 0], [1, 1], [0, 1], [1, 0]], [1, 1, -1, -1]);
    const s = solveSmo(xor, { kernel: { type: 'linear' }, C: Infinity, maxIterations: 2000 });
    expect(s.converged).toBe(false);
    expect(s.iterations).toBe(2000);
    expect(s.maxKktViolation).toBeGreaterThan(1e-3);
    s.alpha.forEach((a) => expect(Number.isFinite(a)).toBe(true));
  });
});

describe('textbook facts on UCI Breast Cancer (standardised), RBF γ = 1/30, C = 1', () => {
  const bc = loadBreastCancer();
  const p = binarySubset({ ...bc, X: standardise(bc.X) }, 1, [0, 1]);
  const options: SmoOptions = { kernel: { type: 'rbf', gamma: 1 / 30 }, C: 1, tol: 1e-6 };
  const full = solveSmo(p, options);
  const nonSv: number[] = [];
  for (let i = 0; i < p.X.rows && nonSv.length < 25; i++) {
    if (full.alpha[i] === 0 && p.y[i] * full.decision[i] > 1.05) nonSv.push(i);
  }

  it('removing non-support vectors leaves the solution unchanged (Cᵢ = 0)', () => {
    // textbook fact: a sample with α = 0 and yf > 1 is inactive; removing it keeps the optimum
    expect(nonSv.length).toBe(25);
    const upperBound = new Float64Array(p.X.rows).fill(1);
    for (const i of nonSv) upperBound[i] = 0;
    const s = solveSmo(p, { ...options, upperBound });
    expect(s.dualObjective).toBeCloseTo(full.dualObjective, 6);
    expect(s.b).toBeCloseTo(full.b, 4);
    for (let i = 0; i < p.X.rows; i++) expect(Math.abs(s.decision[i] - full.decision[i])).toBeLessThan(1e-4);
    for (const i of nonSv) expect(s.alpha[i]).toBe(0);
    expect(supportSet(s)).toEqual(supportSet(full));
  });

  it('removing non-support vectors leaves the solution unchanged (rows dropped)', () => {
    // textbook fact, as above
    const { p: q, kept } = dropRows(p, new Set(nonSv));
    const s = solveSmo(q, options);
    expect(s.dualObjective).toBeCloseTo(full.dualObjective, 6);
    kept.forEach((r, k) => {
      expect(Math.abs(s.alpha[k] - full.alpha[r])).toBeLessThan(1e-4);
      expect(Math.abs(s.decision[k] - full.decision[r])).toBeLessThan(1e-4);
    });
  });

  it('removing a bound support vector does change the solution', () => {
    // textbook fact: support vectors carry the solution; dropping one with α = C moves the optimum
    const i = full.alpha.findIndex((a) => a === 1);
    expect(i).toBeGreaterThanOrEqual(0);
    const upperBound = new Float64Array(p.X.rows).fill(1);
    upperBound[i] = 0;
    const s = solveSmo(p, { ...options, upperBound });
    expect(Math.abs(s.dualObjective - full.dualObjective)).toBeGreaterThan(1e-3);
  });

  it('shrinking on and off give the same solution', () => {
    // textbook fact (Joachims 1999; Fan, Chen & Lin 2005): shrinking is a heuristic that must not change the optimum
    const s = solveSmo(p, { ...options, shrinking: false });
    expect(s.dualObjective).toBeCloseTo(full.dualObjective, 6);
    for (let i = 0; i < p.X.rows; i++) expect(Math.abs(s.decision[i] - full.decision[i])).toBeLessThan(1e-4);
    expect(supportSet(s)).toEqual(supportSet(full));
  });

  it('a warm start after flipping labels reaches the cold-start solution', () => {
    // textbook fact: the optimum does not depend on the feasible starting point (strictly convex dual for RBF)
    const y = Int8Array.from(p.y);
    for (const i of [3, 50, 120, 333, 401]) y[i] = -y[i] as 1 | -1;
    const flipped: BinaryProblem = { X: p.X, y };
    const cold = solveSmo(flipped, options);
    const warm = solveSmo(flipped, { ...options, warmStart: full.alpha });
    expect(warm.dualObjective).toBeCloseTo(cold.dualObjective, 6);
    for (let i = 0; i < p.X.rows; i++) expect(Math.abs(warm.alpha[i] - cold.alpha[i])).toBeLessThan(1e-3);
    expect(warm.iterations).toBeLessThan(cold.iterations);
  });

  it('relabelling the five worst-placed samples: warm start is faster than a cold start', () => {
    // the audit use case: flip the labels of the samples with the most negative yᵢf(xᵢ)
    const order = Array.from({ length: p.X.rows }, (_, i) => i).sort(
      (a, b) => p.y[a] * full.decision[a] - p.y[b] * full.decision[b],
    );
    const y = Int8Array.from(p.y);
    for (const i of order.slice(0, 5)) y[i] = -y[i] as 1 | -1;
    const cold = solveSmo({ X: p.X, y }, options);
    const warm = solveSmo({ X: p.X, y }, { ...options, warmStart: full.alpha });
    expect(warm.dualObjective).toBeCloseTo(cold.dualObjective, 6);
    expect(supportSet(warm)).toEqual(supportSet(cold));
    expect(warm.iterations).toBeLessThan(cold.iterations);
  });

  it('decision values agree with decisionValues() on the training rows; float32 cache stays close', () => {
    const f = decisionValues(p, full, p.X);
    for (let i = 0; i < p.X.rows; i++) expect(Math.abs(f[i] - full.decision[i])).toBeLessThan(1e-9);
    const f32 = solveSmo(p, { ...options, cachePrecision: 'float32' });
    expect(f32.dualObjective).toBeCloseTo(full.dualObjective, 4);
  });
});

describe('warm-start repair', () => {
  it('clips to the bounds and restores Σαᵢyᵢ = 0 in the heavier class, largest margin first', () => {
    // hand-worked, 1-D linear kernel, C = 1: x = (3, 1, −1), y = (+1, +1, −1), previous α = (1.5, 1, 1).
    // Clip: α = (1, 1, 1); Σαᵢyᵢ = 1 + 1 − 1 = 1, so the positive class is heavier by 1.
    // Σⱼαⱼyⱼxⱼ = 3 + 1 + 1 = 5, Gᵢ = yᵢxᵢ·5 − 1: G₀ = 14, G₁ = 4; the larger G₀ gives first:
    // α₀ = 1 − 1 = 0 → α = (0, 1, 1). maxIterations = 0 returns this starting point unchanged.
    const p = problem([[3], [1], [-1]], [1, 1, -1]);
    const s = solveSmo(p, { kernel: { type: 'linear' }, C: 1, warmStart: Float64Array.of(1.5, 1, 1), maxIterations: 0 });
    expect(Array.from(s.alpha)).toEqual([0, 1, 1]);
    expect(s.converged).toBe(false);
    // and from there the solver reaches the cold-start optimum
    const warm = solveSmo(p, { kernel: { type: 'linear' }, C: 1, warmStart: Float64Array.of(1.5, 1, 1), tol: 1e-9 });
    const cold = solveSmo(p, { kernel: { type: 'linear' }, C: 1, tol: 1e-9 });
    expect(warm.dualObjective).toBeCloseTo(cold.dualObjective, 9);
  });
});

describe('progress and cancellation', () => {
  const bc = loadBreastCancer();
  const p = binarySubset({ ...bc, X: standardise(bc.X) }, 1, [0, 1]);
  it('calls onProgress every progressEvery iterations', () => {
    const seen: SolverProgress[] = [];
    const s = solveSmo(p, { kernel: { type: 'linear' }, C: 1, tol: 1e-5, progressEvery: 100, onProgress: (q) => seen.push(q) });
    expect(seen.length).toBe(Math.floor(s.iterations / 100));
    seen.forEach((q, k) => {
      expect(q.iteration).toBe(100 * (k + 1));
      expect(q.violation).toBeGreaterThan(0);
    });
  });
  it('throws FitCancelledError when the signal is already aborted', () => {
    const c = new AbortController();
    c.abort();
    expect(() => solveSmo(p, { kernel: { type: 'linear' }, C: 1, signal: c.signal })).toThrow(FitCancelledError);
  });
  it('throws FitCancelledError when aborted during the run', () => {
    const c = new AbortController();
    let calls = 0;
    const run = () =>
      solveSmo(p, {
        kernel: { type: 'rbf', gamma: 0.05 },
        C: 10,
        signal: c.signal,
        progressEvery: 10,
        onProgress: () => {
          if (++calls === 3) c.abort();
        },
      });
    expect(run).toThrow(FitCancelledError);
    expect(calls).toBe(3);
  });
});
