/**
 * Hard-margin mode: decide whether the two classes are linearly separable and, if they are, return
 * the maximum-margin hyperplane with a certificate.
 *
 * Problem. Separable means: some (w, b) has yᵢ(w·xᵢ + b) > 0 for every i; by scaling, equivalently
 * yᵢ(w·xᵢ + b) ≥ 1. The hard-margin SVM minimises ½‖w‖² under those constraints; its dual is the C-SVM
 * dual with C = ∞ (αᵢ ≥ 0, Σαᵢyᵢ = 0, maximise D(α) = Σαᵢ − ½‖Σαᵢyᵢxᵢ‖²).
 *
 * Procedure and why each verdict is sound:
 *
 * 1. Exact test (when the data are small enough, `exactTestMaxEntries`): a phase-I simplex on
 *    Gordan's alternative. With x̃ᵢ = [xᵢ, 1], exactly one of these holds (Gordan, 1873):
 *      (a) some v = (w, b) has yᵢ v·x̃ᵢ > 0 for all i                       — separable;
 *      (b) some λ ≥ 0, Σλᵢ = 1, has Σ λᵢyᵢx̃ᵢ = 0                         — not separable.
 *    (b) says the convex hulls of the two classes meet: Σ_{yᵢ=+1} λᵢxᵢ = Σ_{yᵢ=−1} λᵢxᵢ with both
 *    weight sums ½. The LP finds λ, or proves there is none, in which case its optimal simplex
 *    multipliers give a v of kind (a). Floating-point simplex results are not trusted: a λ is accepted
 *    only after recomputing r = Σλᵢyᵢx̃ᵢ from the data (for any hyperplane, minᵢ yᵢf(xᵢ) ≤ Σλᵢyᵢf(xᵢ) =
 *    v·r ≤ ‖v‖‖r‖, so a tiny ‖r‖ leaves no room for a separating hyperplane of sensible size), and a v
 *    only after checking yᵢf(xᵢ) > 0 on every sample. An LP that decides linear separability exactly is
 *    the textbook route; this is it, in double precision with the results re-checked.
 *
 * 2. Maximum margin: SMO (solveSmo) on the dual with C = ∞, linear kernel, capped at `maxIterations`.
 *    If it converges, the certificate minᵢ yᵢf(xᵢ) ≥ 1 − tol is checked here on every sample, from w
 *    and b. Passing it proves separability (the hyperplane is the witness) and, with the solver's KKT
 *    conditions, that this is the maximum-margin hyperplane up to tol: verdict `separable: true`.
 *
 * 3. Otherwise the verdict is `separable: false`, which means "no certified maximum-margin separating
 *    hyperplane was found" — with `evidence` saying what is actually known:
 *    - 'hull-intersection': the exact test found a common point of the two hulls — not separable;
 *    - 'separating-hyperplane': the exact test found a separating hyperplane, but SMO did not converge
 *      within the cap (separable, max margin not reached);
 *    - 'none': the exact test was not run or was inconclusive. Then nothing is proven. If SMO ran out
 *      of iterations, its dual value D(α) is still a valid bound: weak duality gives ½‖w*‖² ≥ D(α) for
 *      any separating (w*, b*) in canonical form, so a separating hyperplane, if any, has margin width
 *      at most √(2/D(α)). A dual objective that keeps growing is what a non-separable problem
 *      produces (its dual is unbounded), but a finite run of growth is a sign, not a proof. Likewise a
 *      perceptron that keeps cycling proves nothing.
 *    The best hyperplane found (fewest samples with yᵢf(xᵢ) < 0 among the exact test's hyperplane, the
 *    capped SMO iterate and soft-margin DCD fits at C = 1 and C = 100) and its wrong-side count are
 *    reported with it.
 */
import { solveDcd } from './dcd';
import { solveSmo } from './smo';
import type { BinaryProblem, BinarySolution, SolverControl } from './types';
import { EngineInputError, FitCancelledError } from './types';

export interface HardMarginOptions extends SolverControl {
  /** SMO stopping tolerance, and the certificate's slack: minᵢ yᵢf(xᵢ) ≥ 1 − tol. Default 1e-3. */
  readonly tol?: number;
  /** Cap on SMO pair updates for the C = ∞ dual. Default max(200 000, 50·n). */
  readonly maxIterations?: number;
  /**
   * Size limit of the exact test: the simplex tableau has (d + 2) × (n + d + 3) entries. Above this
   * many entries the test is skipped. Default 2 000 000 (16 MB).
   */
  readonly exactTestMaxEntries?: number;
}

/** What the exact test established (see the file comment). */
export type SeparabilityEvidence =
  | {
      readonly kind: 'hull-intersection';
      /** λ ≥ 0 with Σλᵢ = 1 and Σλᵢyᵢx̃ᵢ ≈ 0 (one weight per training row). */
      readonly weights: Float64Array;
      /** A point in both convex hulls: 2·Σ_{yᵢ=+1} λᵢxᵢ. */
      readonly commonPoint: Float64Array;
      /** ‖Σλᵢyᵢx̃ᵢ‖ recomputed from the data. */
      readonly residualNorm: number;
    }
  | {
      readonly kind: 'separating-hyperplane';
      readonly w: Float64Array;
      readonly b: number;
      /** minᵢ yᵢ(w·xᵢ + b), recomputed from the data; > 0. */
      readonly minFunctionalMargin: number;
    }
  | { readonly kind: 'none'; readonly note: string };

export type HardMarginVerdict =
  | {
      readonly separable: true;
      /** Maximum-margin hyperplane: linear kernel, C = ∞, formulation 'smo-unregularised-bias'. */
      readonly solution: BinarySolution;
      /** 2/‖w‖ */
      readonly marginWidth: number;
      /** Certificate: minᵢ yᵢf(xᵢ), recomputed from w and b; ≥ 1 − tol. */
      readonly minFunctionalMargin: number;
    }
  | {
      readonly separable: false;
      readonly reason: string;
      /** Samples with yᵢf(xᵢ) < 0 for `bestHyperplane`. */
      readonly wrongSideCount: number;
      readonly bestHyperplane: { readonly w: Float64Array; readonly b: number };
      readonly evidence: SeparabilityEvidence;
    };

// ---------------------------------------------------------------------------------------------
// Exact test: phase-I simplex on Gordan's alternative.

/**
 * Phase I of the simplex method (dense tableau) for
 *   find λ ≥ 0 with  Σᵢ λᵢ yᵢ xᵢⱼ sⱼ = 0 (j < d),  Σᵢ λᵢ yᵢ = 0,  Σᵢ λᵢ = 1,
 * minimising the sum of m = d + 2 artificial variables. sⱼ scales feature row j to max |·| = 1.
 * Dantzig's rule, with Bland's rule after a run of degenerate pivots (no cycling).
 * Returns λ when the optimum is 0 (feasible), else the simplex multipliers π of the unscaled rows.
 */
function gordanPhaseOne(
  problem: BinaryProblem,
  signal: AbortSignal | undefined,
): { feasible: true; lambda: Float64Array } | { feasible: false; pi: Float64Array } | { feasible: null; note: string } {
  const { X, y } = problem;
  const n = X.rows;
  const d = X.cols;
  const m = d + 2;
  const N = n + m; // λ columns, then artificials
  const W = N + 1; // + right-hand side
  const T = new Float64Array((m + 1) * W); // rows 0 … m−1 constraints, row m reduced costs
  const scale = new Float64Array(d);
  for (let j = 0; j < d; j++) {
    let mx = 0;
    for (let i = 0; i < n; i++) mx = Math.max(mx, Math.abs(X.data[i * d + j]));
    scale[j] = mx > 0 ? 1 / mx : 1;
  }
  for (let i = 0; i < n; i++) {
    for (let j = 0; j < d; j++) T[j * W + i] = y[i] * X.data[i * d + j] * scale[j];
    T[d * W + i] = y[i];
    T[(d + 1) * W + i] = 1;
  }
  for (let r = 0; r < m; r++) T[r * W + n + r] = 1;
  T[(d + 1) * W + N] = 1;
  const basis = new Int32Array(m);
  for (let r = 0; r < m; r++) basis[r] = n + r;
  // Reduced costs of phase I: c = 0 for λ, 1 for artificials; rc = c − 1ᵀ(column) with the artificial basis.
  const obj = m * W;
  for (let k = 0; k < N; k++) {
    let s = 0;
    for (let r = 0; r < m; r++) s += T[r * W + k];
    T[obj + k] = (k >= n ? 1 : 0) - s;
  }
  T[obj + N] = -1; // −(objective value) = −Σ rhs

  const EPS = 1e-11;
  const maxPivots = 50 * N + 1000;
  let degenerateRun = 0;
  for (let pivots = 0; ; pivots++) {
    if (pivots >= maxPivots) return { feasible: null, note: `simplex stopped after ${maxPivots} pivots` };
    if ((pivots & 63) === 0 && signal?.aborted) throw new FitCancelledError();
    const bland = degenerateRun > 50;
    let col = -1;
    let best = -EPS;
    for (let k = 0; k < N; k++) {
      const rc = T[obj + k];
      if (rc < best) {
        col = k;
        if (bland) break;
        best = rc;
      }
    }
    if (col < 0) break; // optimal
    let row = -1;
    let ratio = Infinity;
    for (let r = 0; r < m; r++) {
      const a = T[r * W + col];
      if (a > EPS) {
        const q = T[r * W + N] / a;
        if (q < ratio - 1e-15 || (q <= ratio + 1e-15 && row >= 0 && basis[r] < basis[row])) {
          ratio = q;
          row = r;
        }
      }
    }
    if (row < 0) return { feasible: null, note: 'simplex found an unbounded direction in a bounded problem (numerical trouble)' };
    degenerateRun = ratio <= 1e-14 ? degenerateRun + 1 : 0;
    // Pivot on (row, col).
    const pr = row * W;
    const pv = T[pr + col];
    for (let k = 0; k < W; k++) T[pr + k] /= pv;
    for (let r = 0; r <= m; r++) {
      if (r === row) continue;
      const f = T[r * W + col];
      if (f === 0) continue;
      const rr = r * W;
      for (let k = 0; k < W; k++) T[rr + k] -= f * T[pr + k];
    }
    basis[row] = col;
  }
  const value = -T[obj + N];
  if (value <= 1e-9) {
    const lambda = new Float64Array(n);
    for (let r = 0; r < m; r++) if (basis[r] < n) lambda[basis[r]] = Math.max(0, T[r * W + N]);
    return { feasible: true, lambda };
  }
  // Multipliers: rc(artificial r) = 1 − π_r; undo the row scaling for the feature rows.
  const pi = new Float64Array(m);
  for (let r = 0; r < m; r++) pi[r] = 1 - T[obj + n + r];
  for (let j = 0; j < d; j++) pi[j] *= scale[j];
  return { feasible: false, pi };
}

/** Decision values f(xᵢ) = w·xᵢ + b in double precision. */
function decisions(problem: BinaryProblem, w: Float64Array, b: number): Float64Array {
  const { X } = problem;
  const d = X.cols;
  const f = new Float64Array(X.rows);
  for (let i = 0; i < X.rows; i++) {
    let s = b;
    for (let j = 0; j < d; j++) s += w[j] * X.data[i * d + j];
    f[i] = s;
  }
  return f;
}

function marginStats(problem: BinaryProblem, w: Float64Array, b: number): { min: number; wrong: number } {
  const f = decisions(problem, w, b);
  let min = Infinity;
  let wrong = 0;
  for (let i = 0; i < f.length; i++) {
    const m = problem.y[i] * f[i];
    if (m < min) min = m;
    if (m < 0) wrong++;
  }
  return { min, wrong };
}

/** Run the exact test and check whatever it returns against the data. */
export function exactSeparabilityTest(problem: BinaryProblem, signal?: AbortSignal): SeparabilityEvidence {
  const { X, y } = problem;
  const n = X.rows;
  const d = X.cols;
  const lp = gordanPhaseOne(problem, signal);
  if (lp.feasible === null) return { kind: 'none', note: `exact test inconclusive: ${lp.note}` };
  if (lp.feasible) {
    const lambda = lp.lambda;
    let total = 0;
    for (let i = 0; i < n; i++) total += lambda[i];
    if (!(total > 0)) return { kind: 'none', note: 'exact test inconclusive: empty hull-intersection weights' };
    for (let i = 0; i < n; i++) lambda[i] /= total;
    const r = new Float64Array(d + 1);
    const commonPoint = new Float64Array(d);
    let scale = 1;
    for (let i = 0; i < n; i++) {
      const l = lambda[i];
      let norm2 = 1;
      for (let j = 0; j < d; j++) norm2 += X.data[i * d + j] ** 2;
      scale = Math.max(scale, Math.sqrt(norm2));
      if (l === 0) continue;
      for (let j = 0; j < d; j++) {
        r[j] += l * y[i] * X.data[i * d + j];
        if (y[i] > 0) commonPoint[j] += 2 * l * X.data[i * d + j];
      }
      r[d] += l * y[i];
    }
    let rn = 0;
    for (let j = 0; j <= d; j++) rn += r[j] * r[j];
    rn = Math.sqrt(rn);
    if (rn <= 1e-9 * scale) return { kind: 'hull-intersection', weights: lambda, commonPoint, residualNorm: rn };
    return { kind: 'none', note: `exact test inconclusive: hull-intersection residual ${rn.toExponential(2)} too large` };
  }
  const w = new Float64Array(d);
  for (let j = 0; j < d; j++) w[j] = -lp.pi[j];
  const b = -lp.pi[d];
  const { min } = marginStats(problem, w, b);
  if (min > 0) return { kind: 'separating-hyperplane', w, b, minFunctionalMargin: min };
  return { kind: 'none', note: 'exact test inconclusive: its separating hyperplane failed the check on the data' };
}

// ---------------------------------------------------------------------------------------------

/** Decide linear separability and return the maximum-margin hyperplane when it exists (see top). */
export function decideHardMargin(problem: BinaryProblem, options: HardMarginOptions = {}): HardMarginVerdict {
  const { X, y } = problem;
  const n = X.rows;
  const d = X.cols;
  if (y.length !== n) throw new EngineInputError(`labels: ${y.length}, rows: ${n}`);
  if (X.data.length < n * d) throw new EngineInputError('problem data shorter than rows × cols');
  let pos = 0;
  let neg = 0;
  for (let i = 0; i < n; i++) {
    if (y[i] === 1) pos++;
    else if (y[i] === -1) neg++;
    else throw new EngineInputError(`label ${i} is ${y[i]}; binary labels must be +1 or −1`);
  }
  if (pos === 0 || neg === 0) throw new EngineInputError('hard margin needs samples of both classes');
  for (let k = 0; k < n * d; k++) {
    if (!Number.isFinite(X.data[k])) throw new EngineInputError(`feature value ${k} is not finite`);
  }
  const tol = options.tol ?? 1e-3;
  if (!(tol > 0 && tol < 1)) throw new EngineInputError(`tol must be in (0, 1), got ${tol}`);
  const maxIterations = options.maxIterations ?? Math.max(200_000, 50 * n);
  const budget = options.exactTestMaxEntries ?? 2_000_000;
  const control: SolverControl = { signal: options.signal, onProgress: options.onProgress, progressEvery: options.progressEvery };

  let evidence: SeparabilityEvidence;
  if ((d + 2) * (n + d + 3) <= budget) evidence = exactSeparabilityTest(problem, options.signal);
  else evidence = { kind: 'none', note: `exact test skipped: (d + 2)(n + d + 3) = ${(d + 2) * (n + d + 3)} tableau entries exceed ${budget}` };

  const candidates: { w: Float64Array; b: number; source: string }[] = [];
  let smo: BinarySolution | null = null;
  if (evidence.kind !== 'hull-intersection') {
    smo = solveSmo(problem, { ...control, kernel: { type: 'linear' }, C: Infinity, tol, maxIterations });
    const w = smo.w as Float64Array;
    const { min } = marginStats(problem, w, smo.b);
    if (smo.converged && min >= 1 - tol) {
      return { separable: true, solution: smo, marginWidth: 2 / Math.sqrt(smo.wNormSquared), minFunctionalMargin: min };
    }
    candidates.push({ w, b: smo.b, source: 'the capped C = ∞ SMO iterate' });
  }
  if (evidence.kind === 'separating-hyperplane') candidates.push({ w: evidence.w, b: evidence.b, source: 'the exact test' });
  for (const C of [1, 100]) {
    const s = solveDcd(problem, { ...control, C, tol: 1e-2, seed: 1, maxIterations: 2000 });
    candidates.push({ w: s.w as Float64Array, b: s.b, source: `a soft-margin fit at C = ${C}` });
  }
  let best = candidates[0];
  let bestWrong = Infinity;
  for (const c of candidates) {
    const { wrong } = marginStats(problem, c.w, c.b);
    if (wrong < bestWrong) {
      best = c;
      bestWrong = wrong;
    }
  }

  let reason: string;
  if (evidence.kind === 'hull-intersection') {
    reason =
      'not linearly separable: the convex hulls of the two classes intersect (exact test, residual ' +
      `${evidence.residualNorm.toExponential(1)}); best hyperplane from ${best.source}`;
  } else if (evidence.kind === 'separating-hyperplane') {
    reason =
      'linearly separable (exact test found a separating hyperplane), but the maximum-margin solver ' +
      `${smo?.converged ? 'did not meet the margin certificate' : `did not converge within ${maxIterations} iterations`}`;
  } else {
    const bound = smo && smo.dualObjective > 0 ? `; if separable at all, the margin width is at most ${Math.sqrt(2 / smo.dualObjective).toPrecision(4)} (weak duality)` : '';
    reason =
      `no separating hyperplane found: the C = ∞ dual ${smo?.converged ? 'converged without meeting the margin certificate' : `did not converge within ${maxIterations} iterations`}` +
      `${bound}; this is not a proof of non-separability (${evidence.note}); best hyperplane from ${best.source}`;
  }
  return { separable: false, reason, wrongSideCount: bestWrong, bestHyperplane: { w: best.w, b: best.b }, evidence };
}
