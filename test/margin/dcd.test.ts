import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { dcdWarmStartAfterRelabel, solveDcd, type DcdOptions } from '@/lib/margin/dcd';
import type { BinaryProblem, BinarySolution, DenseRows, SolverProgress } from '@/lib/margin/types';
import { EngineInputError, FitCancelledError } from '@/lib/margin/types';
import { binarySubset, loadBreastCancer, standardise } from './datasets';

function problem(points: number[][], labels: number[]): BinaryProblem {
  const X: DenseRows = { data: Float64Array.from(points.flat()), rows: points.length, cols: points[0].length };
  return { X, y: Int8Array.from(labels) };
}

/**
 * Independent re-derivation of the optimality measures from α alone (nothing taken from the solver
 * but α): w̃ = Σ αᵢyᵢx̃ᵢ, Gᵢ = yᵢw̃·x̃ᵢ − 1 + Dᵢᵢαᵢ, the projected gradients PGᵢ, and the objectives.
 */
function audit(p: BinaryProblem, s: BinarySolution, cost: Float64Array, squared: boolean, B = 1) {
  const { X, y } = p;
  const n = X.rows;
  const d = X.cols;
  const w = new Float64Array(d + 1);
  for (let i = 0; i < n; i++) {
    for (let j = 0; j < d; j++) w[j] += s.alpha[i] * y[i] * X.data[i * d + j];
    w[d] += s.alpha[i] * y[i] * B;
  }
  const pg = new Float64Array(n);
  let pgMax = 0;
  let pgMin = 0;
  let ww = 0;
  for (let j = 0; j <= d; j++) ww += w[j] * w[j];
  let primalLoss = 0;
  let sumAlpha = 0;
  let diagTerm = 0;
  let gapBound = 0;
  for (let i = 0; i < n; i++) {
    const c = cost[i];
    if (c === 0) {
      expect(s.alpha[i]).toBe(0);
      continue;
    }
    let f = w[d] * B;
    for (let j = 0; j < d; j++) f += w[j] * X.data[i * d + j];
    const Dii = squared ? 1 / (2 * c) : 0;
    const U = squared ? Infinity : c;
    const a = s.alpha[i];
    expect(a).toBeGreaterThanOrEqual(0);
    expect(a).toBeLessThanOrEqual(U);
    const G = y[i] * f - 1 + Dii * a;
    const PG = a === 0 ? Math.min(G, 0) : a === U ? Math.max(G, 0) : G;
    pg[i] = PG;
    pgMax = Math.max(pgMax, PG);
    pgMin = Math.min(pgMin, PG);
    const xi = Math.max(0, 1 - y[i] * f);
    primalLoss += squared ? c * xi * xi : c * xi;
    sumAlpha += a;
    diagTerm += Dii * a * a;
    // Hand-derived per-sample bound on the duality gap (see the property test below).
    gapBound += squared ? a * Math.abs(PG) + c * PG * PG : c * Math.abs(PG);
  }
  return {
    wTilde: w,
    violation: pgMax - pgMin,
    primal: 0.5 * ww + primalLoss,
    dual: sumAlpha - 0.5 * ww - 0.5 * diagTerm,
    gapBound,
  };
}

function tildeOf(s: BinarySolution): Float64Array {
  const w = s.w as Float64Array;
  const t = new Float64Array(w.length + 1);
  t.set(w);
  t[w.length] = s.b; // B = 1
  return t;
}

function dist(a: Float64Array, b: Float64Array): number {
  let s = 0;
  for (let j = 0; j < a.length; j++) s += (a[j] - b[j]) ** 2;
  return Math.sqrt(s);
}

const cancer: BinaryProblem = (() => {
  const p = binarySubset(loadBreastCancer(), 0, [0, 1]);
  return { X: standardise(p.X), y: p.y };
})();

describe('hand-worked one-dimensional example', () => {
  // Two points on a line: x₁ = +1 with y₁ = +1, x₂ = −1 with y₂ = −1; bias feature B = 1, so
  // x̃₁ = (1, 1), x̃₂ = (−1, 1) and Q = [[x̃₁·x̃₁, −x̃₁·x̃₂], [−x̃₂·x̃₁, x̃₂·x̃₂]] = [[2, 0], [0, 2]].
  const p = problem([[1], [-1]], [1, -1]);

  it('hinge, C = 10: α = (½, ½), w = 1, b = 0, objectives ½', () => {
    // D(α) = α₁ + α₂ − ½(2α₁² + 2α₂²) is maximised at α₁ = α₂ = ½ (inside [0, 10]).
    // w̃ = ½·(1, 1) + ½·(1, −1) = (1, 0): w = 1, b = 0.  D = 1 − ½·1 = ½.
    // Primal: ½‖w̃‖² = ½, both margins y·f = 1, no slack: P = ½. Gap 0.
    const s = solveDcd(p, { C: 10, tol: 1e-9, seed: 1 });
    expect(s.alpha[0]).toBeCloseTo(0.5, 12);
    expect(s.alpha[1]).toBeCloseTo(0.5, 12);
    expect((s.w as Float64Array)[0]).toBeCloseTo(1, 12);
    expect(s.b).toBeCloseTo(0, 12);
    expect(s.dualObjective).toBeCloseTo(0.5, 12);
    expect(s.primalObjective).toBeCloseTo(0.5, 12);
    expect(s.wNormSquared).toBeCloseTo(1, 12);
    expect(Array.from(s.decision)).toEqual([expect.closeTo(1, 12), expect.closeTo(-1, 12)]);
    expect(s.formulation).toBe('dcd-regularised-bias');
  });

  it('hinge, C = ¼: both α at the bound, w = ½, objectives 3/8', () => {
    // The unconstrained maximiser ½ exceeds C = ¼, so α₁ = α₂ = ¼; w̃ = (½, 0): w = ½, b = 0.
    // D = ½ − ½·(¼) = 0.375.  Primal: ½·¼ + ¼·(1 − ½)·2 = 0.125 + 0.25 = 0.375.
    const s = solveDcd(p, { C: 0.25, tol: 1e-9, seed: 1 });
    expect(Array.from(s.alpha)).toEqual([0.25, 0.25]);
    expect((s.w as Float64Array)[0]).toBeCloseTo(0.5, 12);
    expect(s.dualObjective).toBeCloseTo(0.375, 12);
    expect(s.primalObjective).toBeCloseTo(0.375, 12);
    expect(Array.from(s.upperBound)).toEqual([0.25, 0.25]);
  });

  it('squared hinge, C = 1: α = 2/5, w = 4/5, objectives 2/5', () => {
    // Dᵢᵢ = 1/(2C) = ½; the stationarity G = 2α − 1 + ½α = 0 gives α = 2/5 for both samples.
    // w̃ = (4/5, 0).  D = 4/5 − ½·(16/25) − ½·(½·4/25 + ½·4/25) = 0.8 − 0.32 − 0.08 = 0.4.
    // Primal: ½·0.64 + 1·(1 − 0.8)²·2 = 0.32 + 0.08 = 0.4.
    const s = solveDcd(p, { C: 1, loss: 'squared-hinge', tol: 1e-10, seed: 1 });
    expect(s.alpha[0]).toBeCloseTo(0.4, 10);
    expect(s.alpha[1]).toBeCloseTo(0.4, 10);
    expect((s.w as Float64Array)[0]).toBeCloseTo(0.8, 10);
    expect(s.dualObjective).toBeCloseTo(0.4, 10);
    expect(s.primalObjective).toBeCloseTo(0.4, 10);
    expect(Array.from(s.upperBound)).toEqual([Infinity, Infinity]);
  });

  it('biasFeature 0 drops the bias', () => {
    // Shift the points to x = 2 (+1) and x = 0 (−1): without a bias the 0 point cannot be fitted.
    // x̃ = x, Q = [[4, 0], [0, 0]]; α₂ has zero curvature and gradient −1, so it goes to C = 1;
    // α₁: G = 4α₁ − 1 = 0 → α₁ = ¼; w = ¼·2 = ½, b = 0.
    const q = problem([[2], [0]], [1, -1]);
    const s = solveDcd(q, { C: 1, tol: 1e-10, seed: 1, biasFeature: 0 });
    expect(s.b).toBe(0);
    expect((s.w as Float64Array)[0]).toBeCloseTo(0.5, 10);
    expect(s.alpha[0]).toBeCloseTo(0.25, 10);
    expect(s.alpha[1]).toBe(1);
  });
});

describe('behaviour on the UCI breast cancer data (standardised)', () => {
  it('shrinking on and off reach the same solution', () => {
    const on = solveDcd(cancer, { C: 1, tol: 1e-5, seed: 5, maxIterations: 50_000 });
    const off = solveDcd(cancer, { C: 1, tol: 1e-5, seed: 5, maxIterations: 50_000, shrinking: false });
    expect(on.converged && off.converged).toBe(true);
    // Both primal values bound the optimum from above and both duals from below.
    expect(Math.abs(on.primalObjective - off.primalObjective)).toBeLessThanOrEqual(Math.max(on.dualityGap, off.dualityGap) + 1e-12);
    // Strong convexity of the primal: ‖w̃ − w̃*‖² ≤ 2(P(w̃) − P*) ≤ 2·gap.
    expect(dist(tildeOf(on), tildeOf(off))).toBeLessThanOrEqual(Math.sqrt(2 * on.dualityGap) + Math.sqrt(2 * off.dualityGap));
  });

  it('Float32Array rows give the solution of the same values in Float64Array', () => {
    const f32 = Float32Array.from(cancer.X.data);
    const p32: BinaryProblem = { X: { data: f32, rows: cancer.X.rows, cols: cancer.X.cols }, y: cancer.y };
    const p64: BinaryProblem = { X: { data: Float64Array.from(f32), rows: cancer.X.rows, cols: cancer.X.cols }, y: cancer.y };
    const a = solveDcd(p32, { C: 0.5, tol: 1e-3, seed: 9 });
    const b = solveDcd(p64, { C: 0.5, tol: 1e-3, seed: 9 });
    // Same values, same seed: the same sequence of coordinate steps.
    expect(a.iterations).toBe(b.iterations);
    expect(a.dualObjective).toBeCloseTo(b.dualObjective, 9);
    expect(dist(tildeOf(a), tildeOf(b))).toBeLessThan(1e-9);
  });

  it("rowPrecision 'float32' iterates on float32 rows but verifies and certifies on the rows as given", () => {
    const tol = 1e-3;
    const narrow = solveDcd(cancer, { C: 1, tol, seed: 6, maxIterations: 50_000, rowPrecision: 'float32' });
    const exact = solveDcd(cancer, { C: 1, tol, seed: 6, maxIterations: 50_000, rowPrecision: 'input' });
    expect(narrow.converged).toBe(true);
    // Re-derived from α with the Float64 rows: w, b, KKT and objectives all refer to the given problem.
    const chk = audit(cancer, narrow, new Float64Array(cancer.X.rows).fill(1), false);
    expect(dist(chk.wTilde, tildeOf(narrow))).toBeLessThan(1e-10 * (1 + Math.sqrt(narrow.wNormSquared)));
    expect(chk.violation).toBeLessThanOrEqual(tol + 1e-12);
    expect(narrow.maxKktViolation).toBeCloseTo(chk.violation, 12);
    expect(narrow.dualObjective).toBeCloseTo(chk.dual, 9);
    expect(narrow.primalObjective).toBeCloseTo(chk.primal, 9);
    expect(Math.abs(narrow.primalObjective - exact.primalObjective)).toBeLessThanOrEqual(Math.max(narrow.dualityGap, exact.dualityGap));
  });

  it('warm start after 12 label flips reaches the cold solution', () => {
    const base = solveDcd(cancer, { C: 1, tol: 1e-3, seed: 2, maxIterations: 50_000 });
    const y2 = Int8Array.from(cancer.y);
    for (const i of [3, 50, 77, 120, 199, 250, 301, 333, 410, 444, 500, 560]) y2[i] = -y2[i];
    const flipped: BinaryProblem = { X: cancer.X, y: y2 };
    const cold = solveDcd(flipped, { C: 1, tol: 1e-3, seed: 2, maxIterations: 50_000 });
    const warmAlpha = solveDcd(flipped, {
      C: 1,
      tol: 1e-3,
      seed: 2,
      maxIterations: 50_000,
      warmStart: dcdWarmStartAfterRelabel(base.alpha, cancer.y, y2),
    });
    const warmFrom = solveDcd(flipped, { C: 1, tol: 1e-3, seed: 2, maxIterations: 50_000, warmStartFrom: { previous: base, previousY: cancer.y } });
    for (const s of [cold, warmAlpha, warmFrom]) {
      expect(s.converged).toBe(true);
      expect(s.maxKktViolation).toBeLessThanOrEqual(1e-3);
    }
    // The same optimum: all primal values lie within the largest gap of each other.
    const gap = Math.max(cold.dualityGap, warmAlpha.dualityGap, warmFrom.dualityGap);
    expect(Math.abs(warmAlpha.primalObjective - cold.primalObjective)).toBeLessThanOrEqual(gap);
    expect(Math.abs(warmFrom.primalObjective - cold.primalObjective)).toBeLessThanOrEqual(gap);
    // The flipped samples' old α were not carried over.
    for (const i of [3, 50, 77]) expect(dcdWarmStartAfterRelabel(base.alpha, cancer.y, y2)[i]).toBe(0);
    // (No claim about iteration counts here: on this small, ill-conditioned problem — 2 % of the labels
    // flipped at C = 1 — DCD from the warm point needs about as many passes as from zero; the saving
    // shows at scale, see bench/engine.ts.)
  });

  it('an optimal warm start costs one read-only pass', () => {
    const s = solveDcd(cancer, { C: 1, tol: 1e-2, seed: 4, maxIterations: 50_000 });
    const again = solveDcd(cancer, { C: 1, tol: 1e-2, seed: 4, warmStart: s.alpha });
    expect(again.iterations).toBe(1);
    expect(again.converged).toBe(true);
    expect(again.dualObjective).toBeCloseTo(s.dualObjective, 9);
    const from = solveDcd(cancer, { C: 1, tol: 1e-2, seed: 4, warmStartFrom: { previous: s, previousY: cancer.y } });
    expect(from.iterations).toBe(1);
    expect(from.converged).toBe(true);
    expect(from.dualObjective).toBeCloseTo(s.dualObjective, 9);
    // Excluding a sample with αᵢ = 0 leaves the solution unchanged (textbook fact: a non-support
    // vector does not enter w = Σαᵢyᵢxᵢ), and the refit confirms it with one check.
    const nonSv = s.alpha.findIndex((a) => a === 0);
    const ub = new Float64Array(cancer.X.rows).fill(1);
    ub[nonSv] = 0;
    const without = solveDcd(cancer, { C: 1, upperBound: ub, tol: 1e-2, seed: 4, warmStartFrom: { previous: s, previousY: cancer.y } });
    expect(without.iterations).toBe(1);
    expect(Array.from(without.w as Float64Array)).toEqual(Array.from(s.w as Float64Array));
  });

  it('warmStartFrom with a previous solution from other data is detected and still converges', () => {
    const s = solveDcd(cancer, { C: 1, tol: 1e-3, seed: 4, maxIterations: 50_000 });
    const wrongW = new Float64Array(cancer.X.cols).fill(0.3);
    const bogus: BinarySolution = { ...s, w: wrongW, b: 2 };
    const r = solveDcd(cancer, { C: 1, tol: 1e-3, seed: 4, maxIterations: 50_000, warmStartFrom: { previous: bogus, previousY: cancer.y } });
    expect(r.converged).toBe(true);
    const check = audit(cancer, r, new Float64Array(cancer.X.rows).fill(1), false);
    expect(dist(check.wTilde, tildeOf(r))).toBeLessThan(1e-8);
    expect(Math.abs(r.primalObjective - s.primalObjective)).toBeLessThanOrEqual(r.dualityGap + s.dualityGap);
  });

  it('upperBound 0 excludes a sample exactly as dropping its row', () => {
    const n = cancer.X.rows;
    const d = cancer.X.cols;
    const drop = 17;
    const ub = new Float64Array(n).fill(0.5);
    ub[drop] = 0;
    const excluded = solveDcd(cancer, { C: 99, upperBound: ub, tol: 1e-4, seed: 3, maxIterations: 50_000 });
    const data = new Float64Array((n - 1) * d);
    const y = new Int8Array(n - 1);
    for (let i = 0, k = 0; i < n; i++) {
      if (i === drop) continue;
      data.set(cancer.X.data.subarray(i * d, (i + 1) * d), k * d);
      y[k++] = cancer.y[i];
    }
    const dropped = solveDcd({ X: { data, rows: n - 1, cols: d }, y }, { C: 0.5, tol: 1e-4, seed: 3, maxIterations: 50_000 });
    expect(excluded.alpha[drop]).toBe(0);
    expect(excluded.upperBound[drop]).toBe(0);
    expect(Math.abs(excluded.primalObjective - dropped.primalObjective)).toBeLessThanOrEqual(excluded.dualityGap + dropped.dualityGap);
    // The excluded row still gets its decision value.
    const w = excluded.w as Float64Array;
    let f = excluded.b;
    for (let j = 0; j < d; j++) f += w[j] * cancer.X.data[drop * d + j];
    expect(excluded.decision[drop]).toBeCloseTo(f, 10);
  });

  it('class weights equal the corresponding per-sample bounds', () => {
    const cw = solveDcd(cancer, { C: 0.8, classWeights: { positive: 2, negative: 0.5 }, tol: 1e-3, seed: 8 });
    const ub = Float64Array.from(cancer.y, (v) => (v > 0 ? 1.6 : 0.4));
    const pb = solveDcd(cancer, { C: 123, upperBound: ub, tol: 1e-3, seed: 8 });
    expect(cw.dualObjective).toBe(pb.dualObjective);
    expect(Array.from(cw.upperBound)).toEqual(Array.from(ub));
  });

  it('the iteration cap returns converged = false with valid certificates', () => {
    const s = solveDcd(cancer, { C: 10, tol: 1e-6, seed: 1, maxIterations: 3 });
    expect(s.iterations).toBe(3);
    expect(s.converged).toBe(false);
    expect(s.dualityGap).toBeGreaterThan(0);
    const check = audit(cancer, s, new Float64Array(cancer.X.rows).fill(10), false);
    expect(s.maxKktViolation).toBeCloseTo(check.violation, 9);
    expect(s.dualObjective).toBeCloseTo(check.dual, 8);
    expect(s.primalObjective).toBeCloseTo(check.primal, 8);
  });

  it('reports progress and honours an abort signal', () => {
    const seen: SolverProgress[] = [];
    solveDcd(cancer, { C: 1, tol: 1e-4, seed: 1, maxIterations: 50, progressEvery: 5, onProgress: (p) => seen.push(p) });
    expect(seen.length).toBe(10);
    expect(seen.map((p) => p.iteration)).toEqual([5, 10, 15, 20, 25, 30, 35, 40, 45, 50]);
    expect(seen.every((p) => p.violation >= 0)).toBe(true);

    const controller = new AbortController();
    let calls = 0;
    const run = () =>
      solveDcd(cancer, {
        C: 1,
        tol: 1e-6,
        seed: 1,
        maxIterations: 1000,
        progressEvery: 1,
        signal: controller.signal,
        onProgress: () => {
          if (++calls === 3) controller.abort();
        },
      });
    expect(run).toThrow(FitCancelledError);
    expect(calls).toBe(3);
  });
});

describe('input checks', () => {
  const p = problem(
    [
      [0, 1],
      [1, 0],
      [2, 2],
    ],
    [1, -1, 1],
  );
  const base: DcdOptions = { C: 1, seed: 1 };
  it.each([
    ['one class only', { ...p, y: Int8Array.from([1, 1, 1]) }, base],
    ['a label that is not ±1', { ...p, y: Int8Array.from([1, 0, -1]) }, base],
    ['NaN feature', { ...p, X: { ...p.X, data: Float64Array.from([0, 1, NaN, 0, 2, 2]) } }, base],
    ['C ≤ 0', p, { ...base, C: 0 }],
    ['C = ∞', p, { ...base, C: Infinity }],
    ['negative tol', p, { ...base, tol: -1 }],
    ['short warm start', p, { ...base, warmStart: new Float64Array(2) }],
    ['a negative per-sample bound', p, { ...base, upperBound: Float64Array.from([1, -1, 1]) }],
    ['no positive sample left', p, { ...base, upperBound: Float64Array.from([0, 1, 0]) }],
  ] as const)('rejects %s', (_name, prob, opts) => {
    expect(() => solveDcd(prob, opts)).toThrow(EngineInputError);
  });
});

describe('property: KKT, duality gap and seed independence on random small problems', () => {
  it('holds for random data, costs and losses', () => {
    const arb = fc
      .record({
        n: fc.integer({ min: 4, max: 24 }),
        d: fc.integer({ min: 1, max: 4 }),
        seedData: fc.integer({ min: 1, max: 1_000_000 }),
        C: fc.double({ min: 0.01, max: 5, noNaN: true }),
        squared: fc.boolean(),
        seedA: fc.integer({ min: 0, max: 1000 }),
        seedB: fc.integer({ min: 1001, max: 2000 }),
      })
      .map((r) => {
        // Deterministic data from seedData (a small LCG is enough for test inputs).
        let s = r.seedData;
        const next = () => {
          s = (s * 1103515245 + 12345) % 2147483648;
          return s / 2147483648;
        };
        const pts: number[][] = [];
        const labels: number[] = [];
        for (let i = 0; i < r.n; i++) {
          pts.push(Array.from({ length: r.d }, () => Math.round((next() * 6 - 3) * 100) / 100));
          labels.push(i === 0 ? 1 : i === 1 ? -1 : next() < 0.5 ? 1 : -1);
        }
        return { ...r, p: problem(pts, labels) };
      });
    fc.assert(
      fc.property(arb, ({ p, C, squared, seedA, seedB }) => {
        const tol = 1e-4;
        const loss = squared ? 'squared-hinge' : 'hinge';
        const a = solveDcd(p, { C, loss, tol, seed: seedA, maxIterations: 200_000 });
        const b = solveDcd(p, { C, loss, tol, seed: seedB, maxIterations: 200_000 });
        const cost = new Float64Array(p.X.rows).fill(C);
        for (const s of [a, b]) {
          expect(s.converged).toBe(true);
          const chk = audit(p, s, cost, squared);
          // KKT: the projected gradients recomputed from α alone lie within tol.
          expect(chk.violation).toBeLessThanOrEqual(tol + 1e-9);
          // The returned w, b are Σαᵢyᵢx̃ᵢ.
          expect(dist(chk.wTilde, tildeOf(s))).toBeLessThanOrEqual(1e-9 * (1 + Math.sqrt(s.wNormSquared)));
          // Certificates agree with the independent recomputation.
          expect(s.primalObjective).toBeCloseTo(chk.primal, 8);
          expect(s.dualObjective).toBeCloseTo(chk.dual, 8);
          // Weak duality, and the gap bound derived by hand:
          //   with w̃ = Σαyx̃, P − D = Σᵢ [Cᵢ·loss(gᵢ) + αᵢgᵢ (+ αᵢ²/(4Cᵢ))] with gᵢ = yᵢf(xᵢ) − 1;
          //   hinge: each term is αᵢGᵢ (Gᵢ ≥ 0) or (Cᵢ − αᵢ)(−Gᵢ) (Gᵢ < 0), both ≤ Cᵢ|PGᵢ|;
          //   squared hinge: each term is ≤ αᵢ|PGᵢ| + Cᵢ·PGᵢ².
          expect(s.dualityGap).toBeGreaterThanOrEqual(-1e-9 * (1 + Math.abs(s.primalObjective)));
          expect(s.dualityGap).toBeLessThanOrEqual(chk.gapBound + 1e-9 * (1 + Math.abs(s.primalObjective)));
        }
        // Seed independence: P(w̃ₐ), P(w̃_b) ≥ P* ≥ D, so they differ by at most the larger gap, and by
        // strong convexity ‖w̃ − w̃*‖ ≤ √(2·gap).
        const slack = 1e-9 * (1 + Math.abs(a.primalObjective));
        expect(Math.abs(a.primalObjective - b.primalObjective)).toBeLessThanOrEqual(Math.max(a.dualityGap, b.dualityGap) + slack);
        expect(dist(tildeOf(a), tildeOf(b))).toBeLessThanOrEqual(Math.sqrt(2 * Math.max(a.dualityGap, 0)) + Math.sqrt(2 * Math.max(b.dualityGap, 0)) + 1e-7);
      }),
      { numRuns: 120, seed: 20240601 },
    );
  });
});
