/**
 * Large-scale linear SVM: dual coordinate descent (DCD) with random permutation and shrinking.
 *
 * Method: C.-J. Hsieh, K.-W. Chang, C.-J. Lin, S. S. Keerthi and S. Sundararajan, "A Dual Coordinate
 * Descent Method for Large-scale Linear SVM", ICML 2008 — Algorithm 1 (coordinate-wise Newton step
 * with projection, random permutation of the coordinates in every outer iteration) with the
 * shrinking of Algorithm 3, organised as in LIBLINEAR's `solve_l2r_l1l2_svc` (same names: QD, G, PG,
 * PGmax_old / PGmin_old, active_size, index).
 *
 * Problem (bias as an extra constant feature B, hence *regularised*: formulation
 * 'dcd-regularised-bias'). With x̃ᵢ = [xᵢ, B] and w̃ = [w, w_B], the bias is b = w_B·B and
 *
 *   primal   min_w̃  ½‖w̃‖² + Σᵢ Cᵢ max(0, 1 − yᵢ w̃·x̃ᵢ)        (hinge, LIBLINEAR -s 3)
 *            min_w̃  ½‖w̃‖² + Σᵢ Cᵢ max(0, 1 − yᵢ w̃·x̃ᵢ)²       (squared hinge, LIBLINEAR -s 1)
 *
 *   dual     max_α  D(α) = Σᵢ αᵢ − ½‖Σᵢ αᵢ yᵢ x̃ᵢ‖² − ½ Σᵢ Dᵢᵢ αᵢ²,   0 ≤ αᵢ ≤ Uᵢ
 *            hinge: Uᵢ = Cᵢ, Dᵢᵢ = 0;   squared hinge: Uᵢ = ∞, Dᵢᵢ = 1/(2Cᵢ)
 *
 * and w̃ = Σᵢ αᵢ yᵢ x̃ᵢ at the optimum. There is no equality constraint (that is what the regularised
 * bias buys), so every coordinate can be optimised on its own. Cᵢ = C·(class weight of yᵢ), or the
 * caller's per-sample `upperBound`; Cᵢ = 0 excludes sample i (αᵢ = 0, no loss term).
 *
 * One coordinate step (i in the random order): the partial derivative of −D is
 *   G = yᵢ w̃·x̃ᵢ − 1 + Dᵢᵢ αᵢ,
 * the projected gradient PG is G, except PG = min(G, 0) at αᵢ = 0 and PG = max(G, 0) at αᵢ = Uᵢ, and
 * the update is αᵢ ← min(max(αᵢ − G/QDᵢ, 0), Uᵢ) with QDᵢ = ‖x̃ᵢ‖² + Dᵢᵢ, followed by
 * w̃ ← w̃ + (αᵢ_new − αᵢ_old) yᵢ x̃ᵢ.
 *
 * Shrinking (Algorithm 3): in an outer iteration, a coordinate at αᵢ = 0 with G > PGmax_old, or at
 * αᵢ = Uᵢ with G < PGmin_old, is removed from the active set (PGmax_old / PGmin_old are the extreme
 * projected gradients of the previous outer iteration, reset to ±∞ when they have the wrong sign).
 *
 * Stopping rule: max(PGmax, 0) − min(PGmin, 0) ≤ tol over the active set (this equals the rule of
 * LIBLINEAR ≥ 2.4, "PGmax − PGmin ≤ ε and |PGmax| ≤ ε and |PGmin| ≤ ε", and LIBLINEAR 2.3's
 * "PGmax − PGmin ≤ ε" whenever PGmax ≥ 0 ≥ PGmin; default tol 0.1 as LIBLINEAR's -e for -s 3).
 *
 * One deliberate difference from LIBLINEAR, for exact certificates and speed: when the active set
 * meets the rule, LIBLINEAR re-activates all coordinates and runs a full *updating* pass, whose
 * projected gradients are measured at a moving point. This solver instead runs a full *read-only* pass
 * at the current point: it evaluates the rule exactly at the point it would return. If the rule holds
 * there, it stops; if not, the gradients of that pass are exact, so every bound sample that satisfies
 * its KKT condition at that point is shrunk at once and the updating passes resume. Hence
 * `maxKktViolation` is the full-set max(PG, 0) − min(PG, 0) at the returned α, and `converged` means
 * it is ≤ tol. Each pass (updating or read-only) counts as one outer iteration towards `maxIterations`.
 *
 * The solution's `upperBound` holds the bounds Uᵢ actually used: Cᵢ for the hinge, ∞ for the squared
 * hinge (whose Cᵢ enters through Dᵢᵢ), 0 for excluded samples.
 *
 * Certificates (minimisation form, see types.ts): primalObjective is the primal above at the returned
 * w̃, dualObjective is D(α) (with ‖w̃‖² of the maintained w̃), dualityGap = primal − dual ≥ 0.
 * LIBLINEAR prints "Objective value = ½‖w̃‖² + ½ΣDᵢᵢαᵢ² − Σαᵢ", which is −D(α).
 *
 * Warm starts (both end with the same full read-only check, so they change the work, not the answer):
 *  - `warmStart` (α only): αᵢ is clipped into [0, Uᵢ], w̃ is rebuilt from α, and the first pass is a
 *    read-only check, so an already-optimal α costs one pass. After label changes, pass 0 for the
 *    changed samples (`dcdWarmStartAfterRelabel`).
 *  - `warmStartFrom` (a previous DCD solution and its labels): w̃ is corrected by the changed αᵢ only,
 *    and the first active set comes from the previous solution's decision values (changed samples,
 *    free αᵢ, KKT violators), so the typical refit after a few relabels touches a few per cent of the
 *    rows plus the final check. This matters with a regularised bias: zeroing the α of relabelled
 *    samples shifts b for every sample, so a full first pass finds violations everywhere and shrinks
 *    little.
 *
 * Performance notes: the inner dot/axpy loops are specialised per array type (Float32Array and
 * Float64Array rows, Float64Array weights) so that every call site stays monomorphic, unrolled by four;
 * no allocation or closure happens inside a pass. The axpy of an update is fused with the dot product
 * of the next sample in the pass (same arithmetic, one sweep over w). Once shrinking has cut the active set to a quarter of
 * the rows or less, its rows are copied together (CompactRows), which saves cache and TLB misses of the
 * random visiting order.
 */
import { createRng } from './random';
import type { BinaryProblem, BinarySolution, SolverControl } from './types';
import { EngineInputError, FitCancelledError } from './types';

/**
 * What `warmStartFrom` reads of a previous solution. Its decision values only choose the first
 * active set, so a float32 copy (a stored model's) serves as well as the solver's own.
 */
export interface PreviousSolution {
  readonly formulation: BinarySolution['formulation'];
  readonly w: Float64Array | null;
  readonly b: number;
  readonly alpha: Float64Array;
  readonly decision: Float64Array | Float32Array;
}

export interface DcdOptions extends SolverControl {
  /** Cost C > 0 (finite). Cᵢ = C · class weight of yᵢ unless `upperBound` is given. */
  readonly C: number;
  /** 'hinge' (L1-loss SVM, LIBLINEAR -s 3) or 'squared-hinge' (L2-loss SVM, LIBLINEAR -s 1). Default 'hinge'. */
  readonly loss?: 'hinge' | 'squared-hinge';
  /** Multipliers of C per class (LIBLINEAR -w1 / -w-1). Default 1 / 1. */
  readonly classWeights?: { readonly positive: number; readonly negative: number };
  /** Per-sample Cᵢ ≥ 0 overriding C · weight; 0 excludes the sample. */
  readonly upperBound?: Float64Array;
  /** Stopping tolerance on max(PG, 0) − min(PG, 0). Default 0.1 (LIBLINEAR -e default for -s 3). */
  readonly tol?: number;
  /** Shrinking of Algorithm 3. Default true. */
  readonly shrinking?: boolean;
  /** The constant feature B appended to every row (LIBLINEAR -B). Default 1; 0 means no bias (b = 0). */
  readonly biasFeature?: number;
  /** Seed of the random permutations (pure-rand xoroshiro128+). */
  readonly seed: number;
  /** Cap on outer iterations (passes). Default 1000 like LIBLINEAR. */
  readonly maxIterations?: number;
  /**
   * Initial α (length n), clipped into [0, Uᵢ]; w̃ is rebuilt from it and the first pass is a full
   * read-only check. After label changes pass 0 for the changed samples (`dcdWarmStartAfterRelabel`).
   */
  readonly warmStart?: Float64Array;
  /**
   * Warm start from a previous DCD fit on the same rows X with the same loss and biasFeature (labels,
   * C, class weights and per-sample bounds may differ). Cheaper than `warmStart`:
   *  - αᵢ is the previous αᵢ where the label is unchanged and 0 where it changed, clipped into [0, Uᵢ];
   *  - w̃ is updated from the previous w, b by the few changed αᵢ instead of being rebuilt from all α;
   *  - the first active set is taken from the previous decision values — changed samples, free αᵢ
   *    and samples whose KKT condition failed there — instead of from a full pass over all rows.
   * None of this is trusted for the result: the returned point is checked on every sample by a full
   * read-only pass, and a previous solution that does not belong to these rows is detected
   * (‖w̃‖² ≠ Σ αᵢyᵢf(xᵢ)) and answered by rebuilding w̃ from α and solving on.
   */
  readonly warmStartFrom?: { readonly previous: PreviousSolution; readonly previousY: Int8Array };
  /**
   * Precision of the rows used by the coordinate updates. 'input' (default) uses X as given;
   * 'float32' works on a Float32Array copy of a Float64Array X (half the memory traffic, n·d·4 more
   * bytes), while every read-only check, the decision values and the certificates still use X itself,
   * with w̃ rebuilt from α in double precision before each check — so the returned α is verified on
   * the problem as given. On the 2-core benchmark machine random passes over float32 rows were only
   * about 15 % cheaper than over doubles, so this is opt-in.
   */
  readonly rowPrecision?: 'input' | 'float32';
}

const EMPTY32 = new Float32Array(0);
const EMPTY64 = new Float64Array(0);

// ---------------------------------------------------------------------------------------------
// Inner kernels. One function per row array type so every call site sees one type (monomorphic).
// ---------------------------------------------------------------------------------------------

function dot32(w: Float64Array, x: Float32Array, off: number, d: number): number {
  let s0 = 0;
  let s1 = 0;
  let s2 = 0;
  let s3 = 0;
  const end = d & ~3;
  let j = 0;
  for (; j < end; j += 4) {
    const o = off + j;
    s0 += w[j] * x[o];
    s1 += w[j + 1] * x[o + 1];
    s2 += w[j + 2] * x[o + 2];
    s3 += w[j + 3] * x[o + 3];
  }
  for (; j < d; j++) s0 += w[j] * x[off + j];
  return s0 + s1 + (s2 + s3);
}

function dot64(w: Float64Array, x: Float64Array, off: number, d: number): number {
  let s0 = 0;
  let s1 = 0;
  let s2 = 0;
  let s3 = 0;
  const end = d & ~3;
  let j = 0;
  for (; j < end; j += 4) {
    const o = off + j;
    s0 += w[j] * x[o];
    s1 += w[j + 1] * x[o + 1];
    s2 += w[j + 2] * x[o + 2];
    s3 += w[j + 3] * x[o + 3];
  }
  for (; j < d; j++) s0 += w[j] * x[off + j];
  return s0 + s1 + (s2 + s3);
}

function axpy32(a: number, x: Float32Array, off: number, d: number, w: Float64Array): void {
  const end = d & ~3;
  let j = 0;
  for (; j < end; j += 4) {
    const o = off + j;
    w[j] += a * x[o];
    w[j + 1] += a * x[o + 1];
    w[j + 2] += a * x[o + 2];
    w[j + 3] += a * x[o + 3];
  }
  for (; j < d; j++) w[j] += a * x[off + j];
}

function axpy64(a: number, x: Float64Array, off: number, d: number, w: Float64Array): void {
  const end = d & ~3;
  let j = 0;
  for (; j < end; j += 4) {
    const o = off + j;
    w[j] += a * x[o];
    w[j + 1] += a * x[o + 1];
    w[j + 2] += a * x[o + 2];
    w[j + 3] += a * x[o + 3];
  }
  for (; j < d; j++) w[j] += a * x[off + j];
}

/** w += a·x[off …]; returns w_new · x[offNext …] (the next sample's dot product, same sweep). */
function axpyDot32(a: number, x: Float32Array, off: number, offNext: number, d: number, w: Float64Array): number {
  let s0 = 0;
  let s1 = 0;
  let s2 = 0;
  let s3 = 0;
  const end = d & ~3;
  let j = 0;
  for (; j < end; j += 4) {
    const o = off + j;
    const p = offNext + j;
    const w0 = w[j] + a * x[o];
    const w1 = w[j + 1] + a * x[o + 1];
    const w2 = w[j + 2] + a * x[o + 2];
    const w3 = w[j + 3] + a * x[o + 3];
    w[j] = w0;
    w[j + 1] = w1;
    w[j + 2] = w2;
    w[j + 3] = w3;
    s0 += w0 * x[p];
    s1 += w1 * x[p + 1];
    s2 += w2 * x[p + 2];
    s3 += w3 * x[p + 3];
  }
  for (; j < d; j++) {
    const wj = w[j] + a * x[off + j];
    w[j] = wj;
    s0 += wj * x[offNext + j];
  }
  return s0 + s1 + (s2 + s3);
}

/** As axpyDot32 for Float64Array rows. */
function axpyDot64(a: number, x: Float64Array, off: number, offNext: number, d: number, w: Float64Array): number {
  let s0 = 0;
  let s1 = 0;
  let s2 = 0;
  let s3 = 0;
  const end = d & ~3;
  let j = 0;
  for (; j < end; j += 4) {
    const o = off + j;
    const p = offNext + j;
    const w0 = w[j] + a * x[o];
    const w1 = w[j + 1] + a * x[o + 1];
    const w2 = w[j + 2] + a * x[o + 2];
    const w3 = w[j + 3] + a * x[o + 3];
    w[j] = w0;
    w[j + 1] = w1;
    w[j + 2] = w2;
    w[j + 3] = w3;
    s0 += w0 * x[p];
    s1 += w1 * x[p + 1];
    s2 += w2 * x[p + 2];
    s3 += w3 * x[p + 3];
  }
  for (; j < d; j++) {
    const wj = w[j] + a * x[off + j];
    w[j] = wj;
    s0 += wj * x[offNext + j];
  }
  return s0 + s1 + (s2 + s3);
}

function nrm32(x: Float32Array, off: number, d: number): number {
  let s0 = 0;
  let s1 = 0;
  const end = d & ~1;
  let j = 0;
  for (; j < end; j += 2) {
    const a = x[off + j];
    const b = x[off + j + 1];
    s0 += a * a;
    s1 += b * b;
  }
  if (j < d) {
    const a = x[off + j];
    s0 += a * a;
  }
  return s0 + s1;
}

function nrm64(x: Float64Array, off: number, d: number): number {
  let s0 = 0;
  let s1 = 0;
  const end = d & ~1;
  let j = 0;
  for (; j < end; j += 2) {
    const a = x[off + j];
    const b = x[off + j + 1];
    s0 += a * a;
    s1 += b * b;
  }
  if (j < d) {
    const a = x[off + j];
    s0 += a * a;
  }
  return s0 + s1;
}

/**
 * A contiguous copy of the rows of a small active set. Rows visited in random order over a large
 * matrix cost a cache and TLB miss each; once shrinking has cut the active set down, copying its rows
 * together (about one pass over them) makes the remaining passes cheaper (about a quarter less time
 * per row visit in our measurements). Pure layout: the
 * arithmetic is the same.
 */
class CompactRows {
  data32: Float32Array = EMPTY32;
  data64: Float64Array = EMPTY64;
  /** pos[i] = row of sample i in the copy, −1 when absent. */
  readonly pos: Int32Array;
  rows = 0;
  private members: Int32Array = new Int32Array(0);

  constructor(n: number) {
    this.pos = new Int32Array(n).fill(-1);
  }

  covers(index: Int32Array, count: number): boolean {
    if (this.rows === 0) return false;
    const pos = this.pos;
    for (let s = 0; s < count; s++) if (pos[index[s]] < 0) return false;
    return true;
  }

  build(index: Int32Array, count: number, isF32: boolean, x32: Float32Array, x64: Float64Array, d: number): void {
    const pos = this.pos;
    for (let k = 0; k < this.rows; k++) pos[this.members[k]] = -1;
    // Copy in ascending row order: a sequential sweep over the source.
    const members = index.slice(0, count).sort();
    if (isF32) {
      const c = new Float32Array(count * d);
      for (let k = 0; k < count; k++) c.set(x32.subarray(members[k] * d, members[k] * d + d), k * d);
      this.data32 = c;
    } else {
      const c = new Float64Array(count * d);
      for (let k = 0; k < count; k++) c.set(x64.subarray(members[k] * d, members[k] * d + d), k * d);
      this.data64 = c;
    }
    for (let k = 0; k < count; k++) pos[members[k]] = k;
    this.members = members;
    this.rows = count;
  }
}

/** Float32 copy of the first m entries; throws on values beyond the float32 range. */
function float32Copy(x: Float64Array, m: number): Float32Array {
  const out = new Float32Array(m);
  for (let k = 0; k < m; k++) {
    const v = x[k];
    const f = Math.fround(v);
    if (f - f !== 0 && v - v === 0) throw new EngineInputError(`feature value ${k} (${v}) exceeds the float32 range; use rowPrecision 'input'`);
    out[k] = f;
  }
  return out;
}

/** Active sets of at most n/4 rows and this many bytes are copied together (CompactRows). */
const COMPACT_MAX_BYTES = 64 * 1024 * 1024;
/** Below this many rows the copy is not worth it. */
const COMPACT_MIN_ROWS = 512;

// ---------------------------------------------------------------------------------------------

function checkFinitePositive(name: string, v: number): void {
  if (!(typeof v === 'number' && Number.isFinite(v) && v > 0)) {
    throw new EngineInputError(`${name} must be a finite number > 0, got ${v}`);
  }
}

/**
 * One read-only pass over all rows: decision[i] = w̃·x̃ᵢ, and the largest / smallest projected gradient
 * over the samples with Cᵢ > 0 into extremes[0] / extremes[1]. Throws on a non-finite feature.
 */
function readOnlyPass(
  w: Float64Array,
  wb: number,
  B: number,
  x32: Float32Array,
  x64: Float64Array,
  isF32: boolean,
  n: number,
  d: number,
  y: Int8Array,
  alpha: Float64Array,
  U: Float64Array,
  diag: Float64Array,
  cost: Float64Array,
  decision: Float64Array,
  extremes: Float64Array,
): void {
  let PGmax = -Infinity;
  let PGmin = Infinity;
  const bias = wb * B;
  for (let i = 0; i < n; i++) {
    const off = i * d;
    const f = (isF32 ? dot32(w, x32, off, d) : dot64(w, x64, off, d)) + bias;
    if (!(f - f === 0)) throw new EngineInputError(`row ${i} has a non-finite feature`);
    decision[i] = f;
    if (cost[i] > 0) {
      const ai = alpha[i];
      const G = y[i] * f - 1 + ai * diag[i];
      let PG = G;
      if (ai === 0) PG = G < 0 ? G : 0;
      else if (ai === U[i]) PG = G > 0 ? G : 0;
      if (PG > PGmax) PGmax = PG;
      if (PG < PGmin) PGmin = PG;
    }
  }
  extremes[0] = PGmax;
  extremes[1] = PGmin;
}

/** w̃ = Σ αᵢ yᵢ x̃ᵢ into w (cleared first); returns the bias weight w̃[d]. */
function rebuildW(
  alpha: Float64Array,
  y: Int8Array,
  x32: Float32Array,
  x64: Float64Array,
  isF32: boolean,
  n: number,
  d: number,
  B: number,
  w: Float64Array,
): number {
  w.fill(0);
  let wb = 0;
  for (let i = 0; i < n; i++) {
    const a = alpha[i];
    if (a > 0) {
      const coef = a * y[i];
      if (isF32) axpy32(coef, x32, i * d, d, w);
      else axpy64(coef, x64, i * d, d, w);
      wb += coef * B;
    }
  }
  return wb;
}

/**
 * Necessary condition for w̃ = Σ αᵢyᵢx̃ᵢ: then ‖w̃‖² = Σ αᵢyᵢ (w̃·x̃ᵢ) = Σ αᵢyᵢf(xᵢ). Rounding leaves
 * a relative difference far below 1e-7; a w̃ from other rows or another bias feature does not.
 */
function consistent(alpha: Float64Array, y: Int8Array, decision: Float64Array, w: Float64Array, wb: number, n: number, d: number): boolean {
  let ww = wb * wb;
  for (let j = 0; j < d; j++) ww += w[j] * w[j];
  let s = 0;
  let scale = 0;
  for (let i = 0; i < n; i++) {
    const a = alpha[i];
    if (a > 0) {
      const t = a * y[i] * decision[i];
      s += t;
      scale += Math.abs(t);
    }
  }
  return Math.abs(ww - s) <= 1e-7 * (ww + scale) + 1e-300;
}

/**
 * Warm-start vector after label changes: the previous αᵢ where the label is unchanged, 0 where it
 * changed (a changed sample's old dual weight belongs to the other side of the constraint).
 */
export function dcdWarmStartAfterRelabel(previousAlpha: Float64Array, previousY: Int8Array, y: Int8Array): Float64Array {
  if (previousAlpha.length !== y.length || previousY.length !== y.length) {
    throw new EngineInputError('warm start: previous α, previous labels and labels must have the same length');
  }
  const a = new Float64Array(y.length);
  for (let i = 0; i < y.length; i++) a[i] = previousY[i] === y[i] ? previousAlpha[i] : 0;
  return a;
}

/** Solve the linear SVM by dual coordinate descent; see the file comment for the exact problem. */
export function solveDcd(problem: BinaryProblem, options: DcdOptions): BinarySolution {
  const { X, y } = problem;
  const n = X.rows;
  const d = X.cols;
  if (!Number.isInteger(n) || !Number.isInteger(d) || n < 1 || d < 0) {
    throw new EngineInputError(`bad matrix shape ${n} × ${d}`);
  }
  if (X.data.length < n * d) throw new EngineInputError(`X.data has ${X.data.length} entries, fewer than ${n} × ${d}`);
  if (y.length !== n) throw new EngineInputError(`y has ${y.length} labels for ${n} rows`);

  const loss = options.loss ?? 'hinge';
  if (loss !== 'hinge' && loss !== 'squared-hinge') throw new EngineInputError(`unknown loss ${String(loss)}`);
  const hinge = loss === 'hinge';
  const tol = options.tol ?? 0.1;
  checkFinitePositive('tol', tol);
  const B = options.biasFeature ?? 1;
  if (!(Number.isFinite(B) && B >= 0)) throw new EngineInputError(`biasFeature must be finite and ≥ 0, got ${B}`);
  const maxIter = options.maxIterations ?? 1000;
  if (!(Number.isInteger(maxIter) && maxIter >= 1)) {
    throw new EngineInputError(`maxIterations must be an integer ≥ 1, got ${maxIter}`);
  }
  const shrinking = options.shrinking ?? true;
  const progressEvery = options.progressEvery ?? 10;
  if (!(Number.isInteger(progressEvery) && progressEvery >= 1)) {
    throw new EngineInputError(`progressEvery must be an integer ≥ 1, got ${progressEvery}`);
  }
  const rng = createRng(options.seed);
  const signal = options.signal;
  const onProgress = options.onProgress;
  if (signal?.aborted) throw new FitCancelledError();

  // Per-sample costs Cᵢ, bounds Uᵢ and diagonal Dᵢᵢ.
  const cost = new Float64Array(n);
  if (options.upperBound !== undefined) {
    const ub = options.upperBound;
    if (ub.length !== n) throw new EngineInputError(`upperBound has ${ub.length} entries for ${n} rows`);
    for (let i = 0; i < n; i++) {
      const c = ub[i];
      if (!(Number.isFinite(c) && c >= 0)) throw new EngineInputError(`upperBound[${i}] must be finite and ≥ 0, got ${c}`);
      cost[i] = c;
    }
  } else {
    checkFinitePositive('C', options.C);
    const wp = options.classWeights?.positive ?? 1;
    const wn = options.classWeights?.negative ?? 1;
    checkFinitePositive('classWeights.positive', wp);
    checkFinitePositive('classWeights.negative', wn);
    const cp = options.C * wp;
    const cn = options.C * wn;
    for (let i = 0; i < n; i++) cost[i] = y[i] > 0 ? cp : cn;
  }

  const U = new Float64Array(n);
  const diag = new Float64Array(n);
  const index = new Int32Array(n);
  let l = 0;
  let havePos = false;
  let haveNeg = false;
  for (let i = 0; i < n; i++) {
    const yi = y[i];
    if (yi !== 1 && yi !== -1) throw new EngineInputError(`labels must be +1 or −1, y[${i}] = ${yi}`);
    const c = cost[i];
    if (c > 0) {
      U[i] = hinge ? c : Infinity;
      diag[i] = hinge ? 0 : 0.5 / c;
      index[l++] = i;
      if (yi > 0) havePos = true;
      else haveNeg = true;
    }
  }
  if (!havePos || !haveNeg) throw new EngineInputError('both classes need at least one sample with Cᵢ > 0');

  const isF32 = X.data instanceof Float32Array;
  const x32: Float32Array = X.data instanceof Float32Array ? X.data : EMPTY32;
  const x64: Float64Array = X.data instanceof Float64Array ? X.data : EMPTY64;
  // Working rows for the coordinate updates (see rowPrecision); the original rows serve every check.
  const precision = options.rowPrecision ?? 'input';
  if (precision !== 'input' && precision !== 'float32') throw new EngineInputError(`unknown rowPrecision ${String(precision)}`);
  const narrow = !isF32 && precision === 'float32';
  const u32: Float32Array = narrow ? float32Copy(x64, n * d) : x32;
  const uIsF32 = isF32 || narrow;

  const alpha = new Float64Array(n);
  const w = new Float64Array(d);
  let wb = 0; // w̃[d], the weight of the constant feature B
  const BB = B * B;
  const QD = new Float64Array(n).fill(NaN); // ‖x̃ᵢ‖² + Dᵢᵢ, computed when sample i is first updated
  const decision = new Float64Array(n);

  let readOnlyNext = false;
  let activeSize = l;
  let wExact = false; // w̃ was just rebuilt from α with the rows as given
  const from = options.warmStartFrom;
  if (from !== undefined && options.warmStart !== undefined) {
    throw new EngineInputError('give either warmStart or warmStartFrom, not both');
  }
  if (options.warmStart !== undefined) {
    const ws = options.warmStart;
    if (ws.length !== n) throw new EngineInputError(`warmStart has ${ws.length} entries for ${n} rows`);
    for (let s = 0; s < l; s++) {
      const i = index[s];
      let a = ws[i];
      a = a > 0 ? a : 0; // also maps NaN to 0
      a = a < U[i] ? a : U[i];
      alpha[i] = a;
    }
    wb = rebuildW(alpha, y, x32, x64, isF32, n, d, B, w);
    wExact = true;
    readOnlyNext = true;
  } else if (from !== undefined) {
    const prev = from.previous;
    const py = from.previousY;
    if (prev.formulation !== 'dcd-regularised-bias' || prev.w === null || prev.w.length !== d) {
      throw new EngineInputError('warmStartFrom needs a linear dcd-regularised-bias solution with w of length d');
    }
    if (prev.alpha.length !== n || prev.decision.length !== n || py.length !== n) {
      throw new EngineInputError('warmStartFrom: previous α, decision values and labels need one entry per row');
    }
    // w̃ from the previous solution, corrected by the αᵢyᵢ that change.
    w.set(prev.w);
    wb = B > 0 ? prev.b / B : 0;
    let changed = 0;
    for (let i = 0; i < n; i++) {
      const ap = prev.alpha[i];
      if (!(ap >= 0 && ap < Infinity)) throw new EngineInputError(`warmStartFrom: previous α[${i}] = ${ap}`);
      const yp = py[i];
      let a = yp === y[i] ? ap : 0;
      a = a > 0 ? a : 0;
      a = a < U[i] ? a : U[i];
      alpha[i] = a;
      const delta = a * y[i] - ap * yp;
      if (delta !== 0) {
        changed++;
        if (uIsF32) axpy32(delta, u32, i * d, d, w);
        else axpy64(delta, x64, i * d, d, w);
        wb += delta * B;
      }
    }
    // Nothing changed (same labels and bounds, or only samples with αᵢ = 0 excluded): the previous
    // point may already be optimal, so check it first.
    if (changed === 0) readOnlyNext = true;
    // First active set from the previous solution: changed samples, free αᵢ and samples whose KKT
    // condition failed there; the others start shrunk.
    const pd = prev.decision;
    let a = 0;
    for (let s = 0; s < l; s++) {
      const i = index[s];
      const ai = alpha[i];
      const G = y[i] * pd[i] - 1 + ai * diag[i];
      const keep = py[i] !== y[i] || !(G === G) || (ai > 0 && ai < U[i]) || (ai === 0 && G < 0) || (ai === U[i] && G > 0);
      if (keep) {
        index[s] = index[a];
        index[a] = i;
        a++;
      }
    }
    if (shrinking) activeSize = a;
  }
  let consistencyPending = from !== undefined; // check ‖w̃‖² = Σ αᵢyᵢf(xᵢ) once before accepting the result

  let iter = 0;
  const compact = new CompactRows(n);
  const compactMaxRows = Math.min(Math.floor(n / 4), Math.floor(COMPACT_MAX_BYTES / (Math.max(d, 1) * (uIsF32 ? 4 : 8))));
  let PGmaxOld = Infinity;
  let PGminOld = -Infinity;
  let converged = false;
  let decisionsCurrent = false; // decision[] holds f(xᵢ) at the current w̃ for every row
  const extremes = new Float64Array(2); // [max PG, min PG] of the last read-only pass

  while (iter < maxIter) {
    if (signal?.aborted) throw new FitCancelledError();

    if (readOnlyNext) {
      // ---- Read-only full pass: exact projected gradients and decision values at the current point.
      readOnlyNext = false;
      // With float32 working rows, w̃ has drifted from Σαᵢyᵢx̃ᵢ of the rows as given by rounding:
      // rebuild it in double precision so that the check below is exact.
      if (narrow && !wExact) wb = rebuildW(alpha, y, x32, x64, isF32, n, d, B, w);
      wExact = true;
      readOnlyPass(w, wb, B, x32, x64, isF32, n, d, y, alpha, U, diag, cost, decision, extremes);
      const PGmax = extremes[0];
      const PGmin = extremes[1];
      decisionsCurrent = true;
      iter++;
      const violation = (PGmax > 0 ? PGmax : 0) - (PGmin < 0 ? PGmin : 0);
      if (onProgress !== undefined && iter % progressEvery === 0) onProgress({ iteration: iter, violation });
      if (violation <= tol) {
        if (consistencyPending) {
          consistencyPending = false;
          if (!consistent(alpha, y, decision, w, wb, n, d)) {
            // The previous solution did not belong to these rows: rebuild w̃ from α and go on.
            wb = rebuildW(alpha, y, x32, x64, isF32, n, d, B, w);
            wExact = true;
            readOnlyNext = true;
            continue;
          }
        }
        converged = true;
        break;
      }
      // Not optimal yet. The gradients of this pass are exact at one point, so shrink every sample at
      // a bound that satisfies its KKT condition here (G ≥ 0 at αᵢ = 0, G ≤ 0 at αᵢ = Uᵢ); the next
      // updating passes shrink further with this pass's extremes as thresholds (Algorithm 3).
      PGmaxOld = shrinking && PGmax > 0 ? PGmax : Infinity;
      PGminOld = shrinking && PGmin < 0 ? PGmin : -Infinity;
      activeSize = l;
      if (shrinking) {
        let s = 0;
        while (s < activeSize) {
          const i = index[s];
          const ai = alpha[i];
          const G = y[i] * decision[i] - 1 + ai * diag[i];
          if ((ai === 0 && G > 0) || (ai === U[i] && G < 0)) {
            activeSize--;
            index[s] = index[activeSize];
            index[activeSize] = i;
          } else {
            s++;
          }
        }
      }
      continue;
    }

    // ---- Updating pass over the active set (LIBLINEAR solve_l2r_l1l2_svc, one outer iteration).
    decisionsCurrent = false;
    wExact = false;
    let PGmaxNew = -Infinity;
    let PGminNew = Infinity;
    for (let s = 0; s < activeSize - 1; s++) {
      const j = rng.int(s, activeSize - 1);
      const t = index[s];
      index[s] = index[j];
      index[j] = t;
    }
    // Once the active set is small, work on a contiguous copy of its rows (see CompactRows).
    let useCompact = false;
    if (activeSize <= compactMaxRows && activeSize >= COMPACT_MIN_ROWS) {
      if (!compact.covers(index, activeSize) || activeSize * 2 <= compact.rows) {
        compact.build(index, activeSize, uIsF32, u32, x64, d);
      }
      useCompact = true;
    }
    const src32 = useCompact ? compact.data32 : u32;
    const src64 = useCompact ? compact.data64 : x64;
    const pos = compact.pos;
    // The dot product of the next sample is fused with the axpy of the current one (one sweep over w
    // instead of two); `pending` holds w̃·xᵢ (without the bias) for i = index[s].
    let pending = 0;
    if (activeSize > 0) {
      const off0 = (useCompact ? pos[index[0]] : index[0]) * d;
      pending = uIsF32 ? dot32(w, src32, off0, d) : dot64(w, src64, off0, d);
    }
    let s = 0;
    while (s < activeSize) {
      const i = index[s];
      const off = (useCompact ? pos[i] : i) * d;
      const yi = y[i];
      const ai = alpha[i];
      const Ui = U[i];
      const G = yi * (pending + wb * B) - 1 + ai * diag[i];

      let PG = 0;
      let shrink = false;
      if (ai === 0) {
        if (G > PGmaxOld) shrink = true;
        else if (G < 0) PG = G;
      } else if (ai === Ui) {
        if (G < PGminOld) shrink = true;
        else if (G > 0) PG = G;
      } else PG = G;

      if (shrink) {
        activeSize--;
        index[s] = index[activeSize];
        index[activeSize] = i;
        if (s < activeSize) {
          const offN = (useCompact ? pos[index[s]] : index[s]) * d;
          pending = uIsF32 ? dot32(w, src32, offN, d) : dot64(w, src64, offN, d);
        }
        continue;
      }

      if (PG > PGmaxNew) PGmaxNew = PG;
      if (PG < PGminNew) PGminNew = PG;

      const hasNext = s + 1 < activeSize;
      const offNext = hasNext ? (useCompact ? pos[index[s + 1]] : index[s + 1]) * d : 0;
      if (PG > 1e-12 || PG < -1e-12) {
        let qd = QD[i];
        if (qd !== qd) {
          qd = (uIsF32 ? nrm32(src32, off, d) : nrm64(src64, off, d)) + BB + diag[i];
          if (!Number.isFinite(qd)) throw new EngineInputError(`row ${i} has a non-finite feature`);
          QD[i] = qd;
        }
        let an = ai - G / qd;
        an = an > 0 ? an : 0;
        an = an < Ui ? an : Ui;
        alpha[i] = an;
        const delta = (an - ai) * yi;
        if (hasNext) {
          pending = uIsF32 ? axpyDot32(delta, src32, off, offNext, d, w) : axpyDot64(delta, src64, off, offNext, d, w);
        } else if (uIsF32) axpy32(delta, src32, off, d, w);
        else axpy64(delta, src64, off, d, w);
        wb += delta * B;
      } else if (hasNext) {
        pending = uIsF32 ? dot32(w, src32, offNext, d) : dot64(w, src64, offNext, d);
      }
      s++;
    }
    iter++;
    const passViolation = (PGmaxNew > 0 ? PGmaxNew : 0) - (PGminNew < 0 ? PGminNew : 0);
    if (onProgress !== undefined && iter % progressEvery === 0) onProgress({ iteration: iter, violation: passViolation });

    if (activeSize === 0 || passViolation <= tol) {
      // The active set looks optimal: verify on the full set at this exact point.
      readOnlyNext = true;
      PGmaxOld = Infinity;
      PGminOld = -Infinity;
      activeSize = l;
      continue;
    }
    PGmaxOld = shrinking && PGmaxNew > 0 ? PGmaxNew : Infinity;
    PGminOld = shrinking && PGminNew < 0 ? PGminNew : -Infinity;
  }

  // ---- Certificates at the returned point.
  if (!decisionsCurrent && narrow && !wExact) wb = rebuildW(alpha, y, x32, x64, isF32, n, d, B, w);
  if (!decisionsCurrent) readOnlyPass(w, wb, B, x32, x64, isF32, n, d, y, alpha, U, diag, cost, decision, extremes);
  if (consistencyPending && !consistent(alpha, y, decision, w, wb, n, d)) {
    wb = rebuildW(alpha, y, x32, x64, isF32, n, d, B, w);
    readOnlyPass(w, wb, B, x32, x64, isF32, n, d, y, alpha, U, diag, cost, decision, extremes);
  }
  const checkMax = extremes[0];
  const checkMin = extremes[1];
  const maxKktViolation = (checkMax > 0 ? checkMax : 0) - (checkMin < 0 ? checkMin : 0);

  let wNormSquared = 0;
  for (let j = 0; j < d; j++) wNormSquared += w[j] * w[j];
  const wTildeSq = wNormSquared + wb * wb;
  let lossSum = 0;
  let alphaSum = 0;
  let diagTerm = 0;
  for (let i = 0; i < n; i++) {
    const c = cost[i];
    if (!(c > 0)) continue;
    const xi = 1 - y[i] * decision[i];
    if (xi > 0) lossSum += hinge ? c * xi : c * xi * xi;
    alphaSum += alpha[i];
    diagTerm += diag[i] * alpha[i] * alpha[i];
  }
  const primalObjective = 0.5 * wTildeSq + lossSum;
  const dualObjective = alphaSum - 0.5 * wTildeSq - 0.5 * diagTerm;

  return {
    formulation: 'dcd-regularised-bias',
    kernel: { type: 'linear' },
    alpha,
    upperBound: U,
    b: wb * B,
    w,
    wNormSquared,
    decision,
    iterations: iter,
    primalObjective,
    dualObjective,
    dualityGap: primalObjective - dualObjective,
    maxKktViolation,
    converged,
    start: from !== undefined ? 'solution' : options.warmStart !== undefined ? 'duals' : 'cold',
  };
}
