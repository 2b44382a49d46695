import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { decideHardMargin, exactSeparabilityTest, type HardMarginVerdict } from '@/lib/margin/hard-margin';
import type { BinaryProblem, DenseRows } from '@/lib/margin/types';
import { EngineInputError, FitCancelledError } from '@/lib/margin/types';
import { binarySubset, loadBreastCancer, loadIris, standardise } from './datasets';
import { parseLibsvmModel, runSvmTrain, sparseFileText } from './reference-tools';

function problem(points: number[][], labels: number[]): BinaryProblem {
  const X: DenseRows = { data: Float64Array.from(points.flat()), rows: points.length, cols: points[0].length };
  return { X, y: Int8Array.from(labels) };
}

/** minᵢ yᵢ(w·xᵢ + b) and the wrong-side count, recomputed here. */
function margins(p: BinaryProblem, w: Float64Array, b: number): { min: number; wrong: number } {
  const d = p.X.cols;
  let min = Infinity;
  let wrong = 0;
  for (let i = 0; i < p.X.rows; i++) {
    let f = b;
    for (let j = 0; j < d; j++) f += w[j] * p.X.data[i * d + j];
    const m = p.y[i] * f;
    min = Math.min(min, m);
    if (m < 0) wrong++;
  }
  return { min, wrong };
}

function separable(v: HardMarginVerdict): Extract<HardMarginVerdict, { separable: true }> {
  if (!v.separable) throw new Error(`expected a separable verdict, got: ${v.reason}`);
  return v;
}

function notSeparable(v: HardMarginVerdict): Extract<HardMarginVerdict, { separable: false }> {
  if (v.separable) throw new Error('expected a non-separable verdict');
  return v;
}

const iris = loadIris();
const tmp = mkdtempSync(join(tmpdir(), 'borderline-hard-margin-'));
afterAll(() => rmSync(tmp, { recursive: true, force: true }));

describe('hand-worked 2-D example', () => {
  // Negatives N₁ = (0, 0), N₂ = (4, 2), N₃ = (3, −1), N₄ = (5, 1); positives P₁ = (1, 4), P₂ = (0, 5), P₃ = (2, 5).
  // Claim: the maximum-margin hyperplane is parallel to the segment N₁N₂ and halfway to P₁.
  //   Normal to N₁N₂ (direction (2, 1)): (−1, 2). P₁ projects onto N₁N₂ at t = P₁·(2,1)/5 = 6/5 ∈ [0, 2],
  //   i.e. at (2.4, 1.2), between N₁ and N₂, so the three points pin the hyperplane.
  //   w = c(−1, 2), b = −1 from f(N₁) = −1;  f(P₁) = c(−1 + 8) − 1 = 7c − 1 = 1 → c = 2/7.
  //   w = (−2/7, 4/7) = (−0.285714286, 0.571428571), b = −1;  f(N₂) = (2/7)(−4 + 4) − 1 = −1 ✓.
  //   ‖w‖² = (4/49)·5 = 20/49 = 0.408163265, ‖w‖ = √20/7 = 0.638876565,
  //   margin width 2/‖w‖ = 7/√5 = 3.130495168 (the distance from P₁ to the line N₁N₂, 7/√5 ✓).
  //   Dual: w = α_P₁·P₁ − α_N₂·N₂ (N₁ is the origin) with α_P₁ = α_N₁ + α_N₂:
  //     (α_P₁ − 4α_N₂, 4α_P₁ − 2α_N₂) = (−2/7, 4/7) → α_N₂ = 6/49, α_P₁ = 10/49, α_N₁ = 4/49 (all > 0).
  //   Other points: f(P₂) = 20/7 − 1 = 13/7, f(P₃) = −4/7 + 20/7 − 1 = 9/7, f(N₃) = −6/7 − 4/7 − 1 = −17/7,
  //   f(N₄) = −10/7 + 4/7 − 1 = −13/7: all yf > 1, so the KKT conditions hold — the optimum.
  //   Objectives: ½‖w‖² = 10/49 = 0.204081633 = Σα − ½‖w‖² = 20/49 − 10/49.
  const p = problem(
    [
      [0, 0],
      [4, 2],
      [3, -1],
      [5, 1],
      [1, 4],
      [0, 5],
      [2, 5],
    ],
    [-1, -1, -1, -1, 1, 1, 1],
  );

  it('finds the hyperplane, its margin width and the dual weights', () => {
    const v = separable(decideHardMargin(p, { tol: 1e-9 }));
    const w = v.solution.w as Float64Array;
    expect(w[0]).toBeCloseTo(-2 / 7, 6);
    expect(w[1]).toBeCloseTo(4 / 7, 6);
    expect(v.solution.b).toBeCloseTo(-1, 6);
    expect(v.marginWidth).toBeCloseTo(3.130495168, 6);
    expect(v.marginWidth).toBeCloseTo(7 / Math.sqrt(5), 6);
    expect(v.minFunctionalMargin).toBeCloseTo(1, 6);
    const a = v.solution.alpha;
    expect(a[0]).toBeCloseTo(4 / 49, 6);
    expect(a[1]).toBeCloseTo(6 / 49, 6);
    expect(a[4]).toBeCloseTo(10 / 49, 6);
    for (const i of [2, 3, 5, 6]) expect(a[i]).toBe(0);
    expect(v.solution.dualObjective).toBeCloseTo(10 / 49, 6);
    expect(v.solution.primalObjective).toBeCloseTo(10 / 49, 6);
    expect(v.solution.formulation).toBe('smo-unregularised-bias');
    expect(v.solution.kernel).toEqual({ type: 'linear' });
  });

  it('the exact test agrees: a separating hyperplane, checked on every point', () => {
    const e = exactSeparabilityTest(p);
    expect(e.kind).toBe('separating-hyperplane');
    if (e.kind !== 'separating-hyperplane') return;
    expect(margins(p, e.w, e.b).min).toBeGreaterThan(0);
  });
});

describe('hand-worked XOR: the hulls meet at the centre', () => {
  // Positives (0, 0), (1, 1); negatives (1, 0), (0, 1). The two diagonals of the unit square cross at
  // (½, ½) = ½(0,0) + ½(1,1) = ½(1,0) + ½(0,1): λ = ¼ for every point (Σλ = 1, each class ½), and
  // Σλᵢyᵢ(xᵢ, 1) = ¼[(0,0,1) + (1,1,1) − (1,0,1) − (0,1,1)] = 0. The crossing point is unique.
  const p = problem(
    [
      [0, 0],
      [1, 1],
      [1, 0],
      [0, 1],
    ],
    [1, 1, -1, -1],
  );

  it('returns the hull-intersection witness and a non-separable verdict', () => {
    const e = exactSeparabilityTest(p);
    expect(e.kind).toBe('hull-intersection');
    if (e.kind !== 'hull-intersection') return;
    for (const l of e.weights) expect(l).toBeCloseTo(0.25, 12);
    expect(Array.from(e.commonPoint)).toEqual([expect.closeTo(0.5, 12), expect.closeTo(0.5, 12)]);
    const v = notSeparable(decideHardMargin(p));
    expect(v.evidence.kind).toBe('hull-intersection');
    expect(v.reason).toMatch(/not linearly separable/);
    expect(v.wrongSideCount).toBe(margins(p, v.bestHyperplane.w as Float64Array, v.bestHyperplane.b).wrong);
  });
});

describe("Fisher's Iris", () => {
  it('setosa is linearly separable from versicolor + virginica, with a checked certificate', () => {
    // Textbook fact: Iris setosa is linearly separable from the other two species (Fisher 1936; commonly stated).
    const p = binarySubset(iris, 0, [0, 1, 2]);
    const v = separable(decideHardMargin(p));
    const w = v.solution.w as Float64Array;
    const { min, wrong } = margins(p, w, v.solution.b);
    expect(wrong).toBe(0);
    expect(min).toBeGreaterThanOrEqual(1 - 1e-3);
    expect(v.minFunctionalMargin).toBeCloseTo(min, 10);
    let ww = 0;
    for (const x of w) ww += x * x;
    expect(v.marginWidth).toBeCloseTo(2 / Math.sqrt(ww), 10);
    expect(v.solution.converged).toBe(true);
  });

  it('the setosa margin width matches LIBSVM svm-train with a C it never reaches', () => {
    // Reference: LIBSVM 3.24 svm-train (Debian libsvm-tools), run here, linear kernel, C = 10⁶.
    // The C-SVM solution equals the hard-margin one whenever every optimal αᵢ < C; checked below.
    const p = binarySubset(iris, 0, [0, 1, 2]);
    const data = join(tmp, 'setosa.txt');
    const modelFile = join(tmp, 'setosa.model');
    writeFileSync(data, sparseFileText(p.X, p.y));
    runSvmTrain(['-s', '0', '-t', '0', '-c', '1000000', '-e', '1e-6'], data, modelFile);
    const model = parseLibsvmModel(readFileSync(modelFile, 'utf8'), p.X.cols);
    const wRef = new Float64Array(p.X.cols);
    let maxAlpha = 0;
    model.svCoef.forEach((c, s) => {
      maxAlpha = Math.max(maxAlpha, Math.abs(c[0]));
      for (let j = 0; j < wRef.length; j++) wRef[j] += c[0] * model.sv[s][j];
    });
    expect(maxAlpha).toBeLessThan(1e6);
    let ww = 0;
    for (const x of wRef) ww += x * x;
    const refWidth = 2 / Math.sqrt(ww);
    const v = separable(decideHardMargin(p, { tol: 1e-6 }));
    expect(Math.abs(v.marginWidth - refWidth)).toBeLessThanOrEqual(1e-3 * refWidth);
  });

  it('versicolor vs virginica (all four features) is not linearly separable', () => {
    // Textbook fact: versicolor and virginica overlap and are not linearly separable (commonly stated about Fisher's Iris).
    const p = binarySubset(iris, 1, [1, 2]);
    const v = notSeparable(decideHardMargin(p));
    expect(v.wrongSideCount).toBeGreaterThanOrEqual(1);
    expect(v.wrongSideCount).toBe(margins(p, v.bestHyperplane.w as Float64Array, v.bestHyperplane.b).wrong);
    expect(v.evidence.kind).toBe('hull-intersection');
    if (v.evidence.kind !== 'hull-intersection') return;
    // Check the witness here, from the data: λ ≥ 0, Σλ = 1, half on each class, Σλᵢyᵢx̃ᵢ ≈ 0.
    const lam = v.evidence.weights;
    let sum = 0;
    let sumPos = 0;
    const r = new Float64Array(5);
    const fromNeg = new Float64Array(4);
    for (let i = 0; i < p.X.rows; i++) {
      expect(lam[i]).toBeGreaterThanOrEqual(0);
      sum += lam[i];
      if (p.y[i] > 0) sumPos += lam[i];
      for (let j = 0; j < 4; j++) {
        r[j] += lam[i] * p.y[i] * p.X.data[i * 4 + j];
        if (p.y[i] < 0) fromNeg[j] += 2 * lam[i] * p.X.data[i * 4 + j];
      }
      r[4] += lam[i] * p.y[i];
    }
    expect(sum).toBeCloseTo(1, 12);
    expect(sumPos).toBeCloseTo(0.5, 9);
    for (const v2 of r) expect(Math.abs(v2)).toBeLessThan(1e-9);
    // The common point is a convex combination of virginica rows and of versicolor rows alike.
    for (let j = 0; j < 4; j++) expect(v.evidence.commonPoint[j]).toBeCloseTo(fromNeg[j], 8);
  });

  it('without the exact test, a capped C = ∞ run only says "not found", with a margin bound', () => {
    const p = binarySubset(iris, 1, [1, 2]);
    const v = notSeparable(decideHardMargin(p, { exactTestMaxEntries: 0, maxIterations: 5000 }));
    expect(v.evidence.kind).toBe('none');
    expect(v.reason).toMatch(/no separating hyperplane found/);
    expect(v.reason).toMatch(/not a proof/);
    expect(v.reason).toMatch(/margin width is at most/);
    expect(v.wrongSideCount).toBeGreaterThanOrEqual(1);
  });

  it('without the exact test, separable data are still certified through SMO', () => {
    const p = binarySubset(iris, 0, [0, 1, 2]);
    const v = separable(decideHardMargin(p, { exactTestMaxEntries: 0 }));
    expect(margins(p, v.solution.w as Float64Array, v.solution.b).min).toBeGreaterThanOrEqual(1 - 1e-3);
  });
});

describe('UCI breast cancer (standardised): separable, but with a tiny margin', () => {
  it('reports separability from the exact test when the max-margin solver hits its cap', () => {
    const bc = binarySubset(loadBreastCancer(), 0, [0, 1]);
    const p = { X: standardise(bc.X), y: bc.y };
    const v = notSeparable(decideHardMargin(p, { maxIterations: 20_000 }));
    expect(v.evidence.kind).toBe('separating-hyperplane');
    if (v.evidence.kind !== 'separating-hyperplane') return;
    expect(margins(p, v.evidence.w, v.evidence.b).min).toBeGreaterThan(0);
    expect(v.wrongSideCount).toBe(0);
    expect(v.reason).toMatch(/linearly separable .* did not converge/);
  });
});

describe('input and control', () => {
  it('rejects one-class problems and non-finite features', () => {
    expect(() => decideHardMargin(problem([[0], [1]], [1, 1]))).toThrow(EngineInputError);
    expect(() => decideHardMargin(problem([[0], [NaN]], [1, -1]))).toThrow(EngineInputError);
  });

  it('honours an aborted signal', () => {
    const controller = new AbortController();
    controller.abort();
    expect(() => decideHardMargin(binarySubset(iris, 0, [0, 1, 2]), { signal: controller.signal })).toThrow(FitCancelledError);
  });
});
