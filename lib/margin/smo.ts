/**
 * Exact C-SVM solver: sequential minimal optimisation with second-order working-set selection,
 * shrinking and gradient reconstruction — the decomposition method of LIBSVM's `Solver`.
 *
 * Dual problem (minimisation form, as solved here). With Qᵢⱼ = yᵢyⱼK(xᵢ, xⱼ) and e the vector of ones,
 *
 *     min_α  f(α) = ½ αᵀQα − eᵀα
 *     s.t.   yᵀα = 0,   0 ≤ αᵢ ≤ Cᵢ   (i = 1 … n),
 *
 * where Cᵢ = C · weight(yᵢ), or a caller-given per-sample bound; Cᵢ = 0 removes sample i from the
 * problem and Cᵢ = ∞ (C = Infinity) gives the hard-margin dual with no upper bound. The reported dual
 * objective is the maximisation value D(α) = eᵀα − ½αᵀQα = −f(α).
 *
 * Gradient G = Qα − e. With I_up(α) = {t | αₜ < Cₜ, yₜ = 1 or αₜ > 0, yₜ = −1} and
 * I_low(α) = {t | αₜ < Cₜ, yₜ = −1 or αₜ > 0, yₜ = 1},
 *
 *     m(α) = max_{t ∈ I_up} −yₜGₜ,   M(α) = min_{t ∈ I_low} −yₜGₜ,
 *
 * and α is optimal iff m(α) ≤ M(α). Stopping rule: m(α) − M(α) < ε (tolerance `tol`, default 1e-3 as
 * LIBSVM's -e), or `maxIterations` pair updates (then `converged = false`).
 *
 * Working set: i = argmax_{t ∈ I_up} −yₜGₜ; j minimises the second-order decrease −b²ᵢₜ / aᵢₜ over
 * t ∈ I_low with −yₜGₜ < −yᵢGᵢ, where aᵢₜ = Qᵢᵢ + Qₜₜ − 2yᵢyₜQᵢₜ (replaced by τ = 1e-12 when ≤ 0) and
 * bᵢₜ = −yᵢGᵢ + yₜGₜ ("WSS 3"). Shrinking every min(n, 1000) iterations removes bounded variables
 * that cannot enter a violating pair; once m − M ≤ 10ε the full gradient is reconstructed from Gbar
 * (Gbarᵢ = Σ_{αⱼ = Cⱼ} CⱼQᵢⱼ) and the free variables, and all variables are checked again before
 * stopping. The bias is unregularised: b = −ρ with ρ the average of yᵢGᵢ over free αᵢ, or the midpoint
 * of the feasible interval when no αᵢ is free. f(x) = Σ αᵢyᵢK(xᵢ, x) + b.
 *
 * References:
 *  - J. C. Platt, "Fast training of support vector machines using sequential minimal optimization",
 *    in Advances in Kernel Methods — Support Vector Learning, MIT Press, 1998.
 *  - R.-E. Fan, P.-H. Chen, C.-J. Lin, "Working set selection using second order information for
 *    training support vector machines", JMLR 6:1889–1918, 2005.
 *  - C.-C. Chang, C.-J. Lin, "LIBSVM: a library for support vector machines", ACM TIST 2(3):27, 2011.
 */
import { kernelExpansion, validateKernel } from './kernel';
import { KernelColumnCache, type CachePrecision, type QColumn } from './kernel-cache';
import type { BinaryProblem, BinarySolution, KernelSpec, SolverControl } from './types';
import { EngineInputError, FitCancelledError } from './types';

export interface SmoOptions extends SolverControl {
  readonly kernel: KernelSpec;
  /** Cost C > 0; Infinity gives the hard-margin dual (no upper bound). */
  readonly C: number;
  /** Cᵢ = C · positive for yᵢ = +1 and C · negative for yᵢ = −1 (LIBSVM -w1 / -w-1). Default 1 / 1. */
  readonly classWeights?: { readonly positive: number; readonly negative: number };
  /** Per-sample Cᵢ overriding C·weight; Cᵢ = 0 excludes sample i (used for leave-one-out pivots). */
  readonly upperBound?: Float64Array;
  /** Stopping tolerance ε on m(α) − M(α). Default 1e-3 like LIBSVM -e. */
  readonly tol?: number;
  /** Shrinking heuristic. Default true. */
  readonly shrinking?: boolean;
  /** Kernel-column cache size in bytes. Default 64 MiB. */
  readonly cacheBytes?: number;
  /** Maximum number of pair updates. Default max(10 000 000, 100·n) like LIBSVM. */
  readonly maxIterations?: number;
  /**
   * Previous α (one per row): clipped to [0, Cᵢ], then Σαᵢyᵢ = 0 is repaired by lowering α in the
   * heavier class, largest functional margin first (see `Solver.repairEquality`).
   */
  readonly warmStart?: Float64Array;
  /**
   * Storage of cached Q columns. Default: float64 when the whole Q matrix fits into the cache,
   * otherwise float32 (as LIBSVM, which always caches float).
   */
  readonly cachePrecision?: CachePrecision;
}

const LOWER_BOUND = 0;
const UPPER_BOUND = 1;
const FREE = 2;
const TAU = 1e-12;
const DEFAULT_CACHE_BYTES = 64 * 1024 * 1024;

interface LoopControl extends SolverControl {
  readonly maxIterations: number;
  readonly shrinking: boolean;
}

/**
 * State of one SMO run. Positions 0 … activeSize−1 are the active (unshrunk) variables; position p
 * holds training row activeSet[p]. Names follow Fan, Chen & Lin (2005) and LIBSVM.
 */
class Solver {
  readonly l: number;
  activeSize: number;
  readonly y: Int8Array;
  readonly alpha: Float64Array;
  readonly C: Float64Array;
  readonly G: Float64Array;
  readonly Gbar: Float64Array;
  readonly alpha_status: Uint8Array;
  readonly activeSet: Int32Array;
  readonly QD: Float64Array;
  readonly Q: KernelColumnCache;
  readonly eps: number;
  unshrink = false;
  /** Working pair chosen by the last successful selectWorkingSet. */
  workingI = -1;
  workingJ = -1;
  /** m(α) − M(α) over the active set at the last selection. */
  lastViolation = Infinity;
  /** Position swaps not yet applied to the kernel cache. */
  private pendingSwaps = new Int32Array(64);
  private pendingCount = 0;

  constructor(Q: KernelColumnCache, y: Int8Array, C: Float64Array, alpha: Float64Array, rows: Int32Array, eps: number) {
    const l = rows.length;
    this.l = l;
    this.activeSize = l;
    this.Q = Q;
    this.QD = Q.QD;
    this.y = y;
    this.C = C;
    this.alpha = alpha;
    this.activeSet = rows;
    this.eps = eps;
    this.G = new Float64Array(l);
    this.Gbar = new Float64Array(l);
    this.alpha_status = new Uint8Array(l);
    for (let i = 0; i < l; i++) this.updateAlphaStatus(i);
  }

  updateAlphaStatus(i: number): void {
    const a = this.alpha[i];
    if (a >= this.C[i]) this.alpha_status[i] = UPPER_BOUND;
    else if (a <= 0) this.alpha_status[i] = LOWER_BOUND;
    else this.alpha_status[i] = FREE;
  }

  /** G = Qα − e and Gbar from the (possibly warm-started) α. */
  initGradient(signal: AbortSignal | undefined): void {
    const { l, G, Gbar, alpha, alpha_status, C } = this;
    G.fill(-1);
    Gbar.fill(0);
    for (let i = 0; i < l; i++) {
      if (alpha_status[i] === LOWER_BOUND) continue;
      if (signal?.aborted) throw new FitCancelledError();
      const Qi = this.Q.getQ(i, l);
      const ai = alpha[i];
      for (let j = 0; j < l; j++) G[j] += ai * Qi[j];
      if (alpha_status[i] === UPPER_BOUND) {
        const Ci = C[i];
        for (let j = 0; j < l; j++) Gbar[j] += Ci * Qi[j];
      }
    }
  }

  /**
   * Restore Σαᵢyᵢ = 0 after a clipped warm start, using the gradient: the excess is removed from the
   * heavier class only, taking α away first from the samples of that class with the largest Gᵢ (the
   * largest functional margin, where the objective gains most from a smaller αᵢ; within one class
   * this order does not depend on b). G and Gbar are updated for every changed αᵢ.
   */
  repairEquality(): void {
    const { l, y, alpha, G } = this;
    let s = 0;
    for (let i = 0; i < l; i++) s += y[i] * alpha[i];
    if (s === 0) return;
    const heavy = s > 0 ? 1 : -1;
    let excess = Math.abs(s);
    const order: number[] = [];
    for (let i = 0; i < l; i++) if (y[i] === heavy && alpha[i] > 0) order.push(i);
    order.sort((u, v) => G[v] - G[u]);
    for (const i of order) {
      if (excess <= 0) break;
      const take = Math.min(alpha[i], excess);
      excess -= take;
      const wasUpper = this.alpha_status[i] === UPPER_BOUND;
      alpha[i] = take === alpha[i] ? 0 : alpha[i] - take;
      const Qi = this.Q.getQ(i, l);
      for (let k = 0; k < l; k++) G[k] -= take * Qi[k];
      this.updateAlphaStatus(i);
      if (wasUpper && this.alpha_status[i] !== UPPER_BOUND) this.moveGbar(i, -this.C[i]);
    }
  }

  /** WSS 3 of Fan, Chen & Lin (2005). Returns true when α is optimal within eps on the active set. */
  selectWorkingSet(): boolean {
    const { activeSize, y, G, alpha_status, QD } = this;
    let Gmax = -Infinity;
    let GmaxIdx = -1;
    for (let t = 0; t < activeSize; t++) {
      if (y[t] === 1) {
        if (alpha_status[t] !== UPPER_BOUND && -G[t] >= Gmax) {
          Gmax = -G[t];
          GmaxIdx = t;
        }
      } else if (alpha_status[t] !== LOWER_BOUND && G[t] >= Gmax) {
        Gmax = G[t];
        GmaxIdx = t;
      }
    }
    const i = GmaxIdx;
    if (i === -1) {
      this.lastViolation = -Infinity;
      return true;
    }
    const Qi = this.Q.getQ(i, activeSize);
    const yi = y[i];
    const QDi = QD[i];
    let Gmax2 = -Infinity;
    let GminIdx = -1;
    let objDiffMin = Infinity;
    for (let j = 0; j < activeSize; j++) {
      let gradDiff: number;
      let quadCoef: number;
      if (y[j] === 1) {
        if (alpha_status[j] === LOWER_BOUND) continue;
        const Gj = G[j];
        if (Gj >= Gmax2) Gmax2 = Gj;
        gradDiff = Gmax + Gj;
        if (gradDiff <= 0) continue;
        quadCoef = QDi + QD[j] - 2 * yi * Qi[j];
      } else {
        if (alpha_status[j] === UPPER_BOUND) continue;
        const Gj = G[j];
        if (-Gj >= Gmax2) Gmax2 = -Gj;
        gradDiff = Gmax - Gj;
        if (gradDiff <= 0) continue;
        quadCoef = QDi + QD[j] + 2 * yi * Qi[j];
      }
      const objDiff = -(gradDiff * gradDiff) / (quadCoef > 0 ? quadCoef : TAU);
      if (objDiff <= objDiffMin) {
        GminIdx = j;
        objDiffMin = objDiff;
      }
    }
    this.lastViolation = Gmax + Gmax2;
    if (Gmax + Gmax2 < this.eps || GminIdx === -1) return true;
    this.workingI = i;
    this.workingJ = GminIdx;
    return false;
  }

  /** Analytic solution of the two-variable subproblem, clipped to the box (LIBSVM's update). */
  updatePair(i: number, j: number): void {
    const { alpha, G, y, C } = this;
    const Qi = this.Q.getQ(i, this.activeSize);
    const Qj = this.Q.getQ(j, this.activeSize);
    const Ci = C[i];
    const Cj = C[j];
    const oldAi = alpha[i];
    const oldAj = alpha[j];
    if (y[i] !== y[j]) {
      let quadCoef = this.QD[i] + this.QD[j] + 2 * Qi[j];
      if (quadCoef <= 0) quadCoef = TAU;
      const delta = (-G[i] - G[j]) / quadCoef;
      const diff = oldAi - oldAj;
      clipOppositeLabels(alpha, i, j, oldAi + delta, oldAj + delta, diff, Ci, Cj);
    } else {
      let quadCoef = this.QD[i] + this.QD[j] - 2 * Qi[j];
      if (quadCoef <= 0) quadCoef = TAU;
      const delta = (G[i] - G[j]) / quadCoef;
      const sum = oldAi + oldAj;
      clipSameLabels(alpha, i, j, oldAi - delta, oldAj + delta, sum, Ci, Cj);
    }
    const dai = alpha[i] - oldAi;
    const daj = alpha[j] - oldAj;
    updateGradient(G, Qi, Qj, dai, daj, this.activeSize);
    this.updateStatusAndGbar(i, j);
  }

  private updateStatusAndGbar(i: number, j: number): void {
    const ui = this.alpha_status[i] === UPPER_BOUND;
    const uj = this.alpha_status[j] === UPPER_BOUND;
    this.updateAlphaStatus(i);
    this.updateAlphaStatus(j);
    if (ui !== (this.alpha_status[i] === UPPER_BOUND)) this.moveGbar(i, ui ? -this.C[i] : this.C[i]);
    if (uj !== (this.alpha_status[j] === UPPER_BOUND)) this.moveGbar(j, uj ? -this.C[j] : this.C[j]);
  }

  moveGbar(i: number, factor: number): void {
    const Qi = this.Q.getQ(i, this.l);
    const Gbar = this.Gbar;
    for (let k = 0, l = this.l; k < l; k++) Gbar[k] += factor * Qi[k];
  }

  /** Swap positions i and j in the solver's arrays; the cache's side is queued (see flushSwaps). */
  swapIndex(i: number, j: number): void {
    if (this.pendingCount * 2 === this.pendingSwaps.length) {
      const grown = new Int32Array(Math.max(64, this.pendingSwaps.length * 2));
      grown.set(this.pendingSwaps);
      this.pendingSwaps = grown;
    }
    this.pendingSwaps[2 * this.pendingCount] = i;
    this.pendingSwaps[2 * this.pendingCount + 1] = j;
    this.pendingCount++;
    swapInt8(this.y, i, j);
    swapF64(this.G, i, j);
    swapU8(this.alpha_status, i, j);
    swapF64(this.alpha, i, j);
    swapF64(this.C, i, j);
    swapI32(this.activeSet, i, j);
    swapF64(this.Gbar, i, j);
  }

  /** Apply the queued swaps to the kernel cache (rows, diagonal QD and cached columns). */
  flushSwaps(): void {
    if (this.pendingCount === 0) return;
    this.Q.swapIndices(this.pendingSwaps, this.pendingCount);
    this.pendingCount = 0;
  }

  /** Inactive G from Gbar plus the free variables' contributions (LIBSVM's reconstruct_gradient). */
  reconstructGradient(): void {
    const { l, activeSize, G, Gbar, alpha, alpha_status } = this;
    if (activeSize === l) return;
    for (let j = activeSize; j < l; j++) G[j] = Gbar[j] - 1;
    let nrFree = 0;
    for (let j = 0; j < activeSize; j++) if (alpha_status[j] === FREE) nrFree++;
    if (nrFree * l > 2 * activeSize * (l - activeSize)) {
      for (let i = activeSize; i < l; i++) {
        const Qi = this.Q.getQ(i, activeSize);
        let s = 0;
        for (let j = 0; j < activeSize; j++) if (alpha_status[j] === FREE) s += alpha[j] * Qi[j];
        G[i] += s;
      }
    } else {
      for (let i = 0; i < activeSize; i++) {
        if (alpha_status[i] !== FREE) continue;
        const Qi = this.Q.getQ(i, l);
        const ai = alpha[i];
        for (let j = activeSize; j < l; j++) G[j] += ai * Qi[j];
      }
    }
  }

  /** Whether a bounded variable cannot be part of a violating pair (LIBSVM's be_shrunk). */
  beShrunk(i: number, Gmax1: number, Gmax2: number): boolean {
    const s = this.alpha_status[i];
    if (s === UPPER_BOUND) return this.y[i] === 1 ? -this.G[i] > Gmax1 : -this.G[i] > Gmax2;
    if (s === LOWER_BOUND) return this.y[i] === 1 ? this.G[i] > Gmax2 : this.G[i] > Gmax1;
    return false;
  }

  doShrinking(): void {
    const Gmax1 = this.maxUp(this.activeSize);
    const Gmax2 = this.maxLow(this.activeSize);
    if (!this.unshrink && Gmax1 + Gmax2 <= this.eps * 10) {
      this.unshrink = true;
      this.reconstructGradient();
      this.activeSize = this.l;
    }
    for (let i = 0; i < this.activeSize; i++) {
      if (!this.beShrunk(i, Gmax1, Gmax2)) continue;
      this.activeSize--;
      while (this.activeSize > i) {
        if (!this.beShrunk(this.activeSize, Gmax1, Gmax2)) {
          this.swapIndex(i, this.activeSize);
          break;
        }
        this.activeSize--;
      }
    }
    this.flushSwaps();
  }

  /** m(α) = max over I_up of −yₜGₜ, among positions [0, size). */
  maxUp(size: number): number {
    const { y, G, alpha_status } = this;
    let m = -Infinity;
    for (let t = 0; t < size; t++) {
      if (y[t] === 1) {
        if (alpha_status[t] !== UPPER_BOUND && -G[t] > m) m = -G[t];
      } else if (alpha_status[t] !== LOWER_BOUND && G[t] > m) m = G[t];
    }
    return m;
  }

  /** −M(α) = max over I_low of yₜGₜ, among positions [0, size). */
  maxLow(size: number): number {
    const { y, G, alpha_status } = this;
    let m = -Infinity;
    for (let t = 0; t < size; t++) {
      if (y[t] === 1) {
        if (alpha_status[t] !== LOWER_BOUND && G[t] > m) m = G[t];
      } else if (alpha_status[t] !== UPPER_BOUND && -G[t] > m) m = -G[t];
    }
    return m;
  }

  /** ρ = −b: mean of yᵢGᵢ over free variables, else the midpoint of the feasible interval. */
  calculateRho(): number {
    const { activeSize, y, G, alpha_status } = this;
    let ub = Infinity;
    let lb = -Infinity;
    let sumFree = 0;
    let nrFree = 0;
    for (let i = 0; i < activeSize; i++) {
      const yG = y[i] * G[i];
      const s = alpha_status[i];
      if (s === FREE) {
        nrFree++;
        sumFree += yG;
      } else if ((s === LOWER_BOUND) === (y[i] === 1)) ub = Math.min(ub, yG);
      else lb = Math.max(lb, yG);
    }
    if (nrFree > 0) return sumFree / nrFree;
    if (Number.isFinite(ub) && Number.isFinite(lb)) return (ub + lb) / 2;
    return Number.isFinite(ub) ? ub : Number.isFinite(lb) ? lb : 0;
  }

  /** The main loop. Returns the iteration count and whether the stopping rule was met. */
  solve(control: LoopControl): { iterations: number; converged: boolean } {
    const { l } = this;
    const { signal, onProgress, maxIterations, shrinking } = control;
    const every = Math.max(1, Math.floor(control.progressEvery ?? 1000));
    let iter = 0;
    let counter = Math.min(l, 1000) + 1;
    let converged = false;
    while (iter < maxIterations) {
      if (--counter === 0) {
        counter = Math.min(l, 1000);
        if (shrinking) this.doShrinking();
      }
      if (this.selectWorkingSet()) {
        this.reconstructGradient();
        this.activeSize = l;
        if (this.selectWorkingSet()) {
          converged = true;
          break;
        }
        counter = 1;
      }
      ++iter;
      this.updatePair(this.workingI, this.workingJ);
      if (signal !== undefined && signal.aborted) throw new FitCancelledError();
      if (onProgress !== undefined && iter % every === 0) onProgress({ iteration: iter, violation: this.lastViolation });
    }
    if (!converged) {
      this.reconstructGradient();
      this.activeSize = l;
    }
    return { iterations: iter, converged };
  }
}

function clipOppositeLabels(
  alpha: Float64Array,
  i: number,
  j: number,
  ai0: number,
  aj0: number,
  diff: number,
  Ci: number,
  Cj: number,
): void {
  let ai = ai0;
  let aj = aj0;
  if (diff > 0) {
    if (aj < 0) {
      aj = 0;
      ai = diff;
    }
  } else if (ai < 0) {
    ai = 0;
    aj = -diff;
  }
  // With Ci = Cj = ∞, Ci − Cj is NaN: both comparisons fail and no upper clipping happens.
  if (diff > Ci - Cj) {
    if (ai > Ci) {
      ai = Ci;
      aj = Ci - diff;
    }
  } else if (aj > Cj) {
    aj = Cj;
    ai = Cj + diff;
  }
  alpha[i] = ai;
  alpha[j] = aj;
}

function clipSameLabels(
  alpha: Float64Array,
  i: number,
  j: number,
  ai0: number,
  aj0: number,
  sum: number,
  Ci: number,
  Cj: number,
): void {
  let ai = ai0;
  let aj = aj0;
  if (sum > Ci) {
    if (ai > Ci) {
      ai = Ci;
      aj = sum - Ci;
    }
  } else if (aj < 0) {
    aj = 0;
    ai = sum;
  }
  if (sum > Cj) {
    if (aj > Cj) {
      aj = Cj;
      ai = sum - Cj;
    }
  } else if (ai < 0) {
    ai = 0;
    aj = sum;
  }
  alpha[i] = ai;
  alpha[j] = aj;
}

function updateGradient(G: Float64Array, Qi: QColumn, Qj: QColumn, dai: number, daj: number, n: number): void {
  for (let k = 0; k < n; k++) G[k] += Qi[k] * dai + Qj[k] * daj;
}

function swapF64(a: Float64Array, i: number, j: number): void {
  const t = a[i];
  a[i] = a[j];
  a[j] = t;
}
function swapI32(a: Int32Array, i: number, j: number): void {
  const t = a[i];
  a[i] = a[j];
  a[j] = t;
}
function swapInt8(a: Int8Array, i: number, j: number): void {
  const t = a[i];
  a[i] = a[j];
  a[j] = t;
}
function swapU8(a: Uint8Array, i: number, j: number): void {
  const t = a[i];
  a[i] = a[j];
  a[j] = t;
}

// ---------------------------------------------------------------------------------------------
// Input handling

interface Prepared {
  /** Per-sample bounds Cᵢ over all n rows. */
  readonly upper: Float64Array;
  /** Rows with Cᵢ > 0, in order. */
  readonly rows: Int32Array;
  readonly tol: number;
  readonly maxIterations: number;
  readonly cacheBytes: number;
}

function validateProblem(problem: BinaryProblem): void {
  const { X, y } = problem;
  if (!Number.isInteger(X.rows) || !Number.isInteger(X.cols) || X.rows < 1 || X.cols < 1) {
    throw new EngineInputError(`problem needs at least one row and one column (got ${X.rows} × ${X.cols})`);
  }
  if (X.data.length < X.rows * X.cols) throw new EngineInputError('problem data shorter than rows × cols');
  if (y.length !== X.rows) throw new EngineInputError(`labels: ${y.length}, rows: ${X.rows}`);
  for (let i = 0; i < y.length; i++) {
    if (y[i] !== 1 && y[i] !== -1) throw new EngineInputError(`label ${i} is ${y[i]}; binary labels must be +1 or −1`);
  }
  const m = X.rows * X.cols;
  for (let k = 0; k < m; k++) {
    if (!Number.isFinite(X.data[k])) throw new EngineInputError(`feature value ${k} is not finite`);
  }
}

function resolveUpperBounds(problem: BinaryProblem, options: SmoOptions): Float64Array {
  const n = problem.X.rows;
  if (!(options.C > 0)) throw new EngineInputError(`C must be positive (or Infinity), got ${options.C}`);
  if (options.upperBound) {
    const ub = options.upperBound;
    if (ub.length !== n) throw new EngineInputError(`upperBound has ${ub.length} entries for ${n} rows`);
    for (let i = 0; i < n; i++) {
      if (!(ub[i] >= 0)) throw new EngineInputError(`upperBound[${i}] must be ≥ 0, got ${ub[i]}`);
    }
    return Float64Array.from(ub);
  }
  const wp = options.classWeights?.positive ?? 1;
  const wn = options.classWeights?.negative ?? 1;
  if (!(wp > 0 && wn > 0 && Number.isFinite(wp) && Number.isFinite(wn))) {
    throw new EngineInputError(`class weights must be positive and finite, got ${wp} / ${wn}`);
  }
  const out = new Float64Array(n);
  for (let i = 0; i < n; i++) out[i] = options.C * (problem.y[i] === 1 ? wp : wn);
  return out;
}

function prepare(problem: BinaryProblem, options: SmoOptions): Prepared {
  validateProblem(problem);
  validateKernel(options.kernel);
  const n = problem.X.rows;
  const tol = options.tol ?? 1e-3;
  if (!(tol > 0 && Number.isFinite(tol))) throw new EngineInputError(`tol must be positive, got ${tol}`);
  const maxIterations = options.maxIterations ?? Math.max(10_000_000, 100 * n);
  if (!(maxIterations >= 0)) throw new EngineInputError(`maxIterations must be ≥ 0, got ${maxIterations}`);
  const cacheBytes = options.cacheBytes ?? DEFAULT_CACHE_BYTES;
  if (!(cacheBytes > 0)) throw new EngineInputError(`cacheBytes must be positive, got ${cacheBytes}`);
  const upper = resolveUpperBounds(problem, options);
  const rowList: number[] = [];
  let pos = 0;
  let neg = 0;
  for (let i = 0; i < n; i++) {
    if (upper[i] <= 0) continue;
    rowList.push(i);
    if (problem.y[i] === 1) pos++;
    else neg++;
  }
  if (pos === 0 || neg === 0) {
    throw new EngineInputError(`both classes need a sample with Cᵢ > 0 (positive: ${pos}, negative: ${neg})`);
  }
  return { upper, rows: Int32Array.from(rowList), tol, maxIterations, cacheBytes };
}

/**
 * Previous α (one entry per training row) clipped to [0, Cᵢ] for the given rows (NaN and negative
 * values become 0). The equality Σαᵢyᵢ = 0 is restored afterwards by the solver (`repairEquality`).
 */
export function clipWarmStart(warm: Float64Array, upper: Float64Array, rows: Int32Array): Float64Array {
  if (warm.length !== upper.length) throw new EngineInputError(`warmStart has ${warm.length} entries for ${upper.length} rows`);
  const a = new Float64Array(rows.length);
  for (let p = 0; p < rows.length; p++) {
    const v = warm[rows[p]];
    a[p] = v > 0 ? Math.min(v, upper[rows[p]]) : 0;
  }
  return a;
}

// ---------------------------------------------------------------------------------------------
// Results

function primalWeights(problem: BinaryProblem, alpha: Float64Array): Float64Array {
  const { X, y } = problem;
  const d = X.cols;
  const w = new Float64Array(d);
  for (let i = 0; i < X.rows; i++) {
    const c = alpha[i] * y[i];
    if (c === 0) continue;
    const o = i * d;
    for (let k = 0; k < d; k++) w[k] += c * X.data[o + k];
  }
  return w;
}

interface Certified {
  readonly primalObjective: number;
  readonly dualObjective: number;
  readonly dualityGap: number;
}

/**
 * P = ½‖w‖² + Σ Cᵢ max(0, 1 − yᵢf(xᵢ)) and D = Σαᵢ − ½‖w‖². The gap is summed per sample as
 * Σ [αᵢ(mᵢ − 1) if mᵢ ≥ 1, else (Cᵢ − αᵢ)(1 − mᵢ)] with mᵢ = yᵢf(xᵢ), which equals P − D when
 * Σαᵢyᵢ = 0 and is non-negative term by term. For Cᵢ = ∞ the hinge term is left out of P (the
 * constraint is hard; its violation shows in maxKktViolation) and the term is αᵢ(mᵢ − 1).
 */
function certify(y: Int8Array, alpha: Float64Array, upper: Float64Array, decision: Float64Array, wNormSquared: number): Certified {
  let sumAlpha = 0;
  let hinge = 0;
  let gap = 0;
  for (let i = 0; i < y.length; i++) {
    const a = alpha[i];
    const Ci = upper[i];
    const m = y[i] * decision[i];
    sumAlpha += a;
    if (m >= 1 || Ci === Infinity) gap += a * (m - 1);
    else {
      hinge += Ci * (1 - m);
      gap += (Ci - a) * (1 - m);
    }
  }
  const dual = sumAlpha - 0.5 * wNormSquared;
  return { primalObjective: 0.5 * wNormSquared + hinge, dualObjective: dual, dualityGap: gap };
}

function kernelResults(solver: Solver, problem: BinaryProblem, alpha: Float64Array, b: number, options: SmoOptions) {
  const n = problem.X.rows;
  const decision = new Float64Array(n);
  const covered = new Uint8Array(n);
  let wNormSquared = 0;
  for (let p = 0; p < solver.l; p++) {
    const r = solver.activeSet[p];
    // Gₚ = yₚ Σⱼ αⱼyⱼK(xₚ, xⱼ) − 1, so f(xₚ) = yₚ(Gₚ + 1) + b and αᵀQα = Σ αₚ(Gₚ + 1).
    decision[r] = solver.y[p] * (solver.G[p] + 1) + b;
    wNormSquared += solver.alpha[p] * (solver.G[p] + 1);
    covered[r] = 1;
  }
  const excluded: number[] = [];
  for (let r = 0; r < n; r++) if (!covered[r]) excluded.push(r);
  if (excluded.length > 0) {
    const d = problem.X.cols;
    const data = new Float64Array(excluded.length * d);
    excluded.forEach((r, k) => data.set(problem.X.data.subarray(r * d, r * d + d), k * d));
    const f = kernelExpansion(options.kernel, problem, alpha, b, { data, rows: excluded.length, cols: d });
    excluded.forEach((r, k) => (decision[r] = f[k]));
  }
  return { decision, wNormSquared, w: null };
}

function linearResults(problem: BinaryProblem, alpha: Float64Array, b: number) {
  const { X } = problem;
  const d = X.cols;
  const w = primalWeights(problem, alpha);
  const decision = new Float64Array(X.rows);
  for (let r = 0; r < X.rows; r++) {
    let s = b;
    const o = r * d;
    for (let k = 0; k < d; k++) s += w[k] * X.data[o + k];
    decision[r] = s;
  }
  let wNormSquared = 0;
  for (let k = 0; k < d; k++) wNormSquared += w[k] * w[k];
  return { decision, wNormSquared, w };
}

/**
 * Solve the C-SVM dual exactly (within `tol`) with SMO. Throws EngineInputError for unusable input
 * and FitCancelledError when `options.signal` is aborted.
 *
 * Results: α per row (0 for excluded rows), b = −ρ, and decision values f(xᵢ) for every row. For a
 * linear kernel w = Σαᵢyᵢxᵢ and f = w·x + b are computed in double precision; otherwise the training
 * rows' f(xᵢ) = yᵢ(Gᵢ + 1) + b and ‖w‖² = Σαᵢ(Gᵢ + 1) are read off the final gradient (as accurate as
 * the cached Q: ~1e-7 relative with the float32 cache), and excluded rows (Cᵢ = 0) get the kernel
 * expansion. Certificates: see `certify`; maxKktViolation = max(0, m(α) − M(α)) over all variables.
 */
export function solveSmo(problem: BinaryProblem, options: SmoOptions): BinarySolution {
  const prep = prepare(problem, options);
  const { rows, upper } = prep;
  const l = rows.length;
  if (options.signal?.aborted) throw new FitCancelledError();
  const alpha0 = options.warmStart ? clipWarmStart(options.warmStart, upper, rows) : new Float64Array(l);
  const precision = options.cachePrecision ?? (l * l * 8 <= prep.cacheBytes ? 'float64' : 'float32');
  const cache = new KernelColumnCache(problem.X, problem.y, rows, {
    kernel: options.kernel,
    cacheBytes: prep.cacheBytes,
    precision,
  });
  const yPos = new Int8Array(l);
  const Cpos = new Float64Array(l);
  for (let p = 0; p < l; p++) {
    yPos[p] = problem.y[rows[p]];
    Cpos[p] = upper[rows[p]];
  }
  const solver = new Solver(cache, yPos, Cpos, alpha0, Int32Array.from(rows), prep.tol);
  solver.initGradient(options.signal);
  if (options.warmStart) solver.repairEquality();
  const { iterations, converged } = solver.solve({
    ...options,
    maxIterations: prep.maxIterations,
    shrinking: options.shrinking ?? true,
  });
  const b = -solver.calculateRho();
  const alpha = new Float64Array(problem.X.rows);
  for (let p = 0; p < l; p++) alpha[solver.activeSet[p]] = solver.alpha[p];
  const maxKktViolation = Math.max(0, solver.maxUp(l) + solver.maxLow(l));
  const res =
    options.kernel.type === 'linear' ? linearResults(problem, alpha, b) : kernelResults(solver, problem, alpha, b, options);
  const cert = certify(problem.y, alpha, upper, res.decision, res.wNormSquared);
  return {
    formulation: 'smo-unregularised-bias',
    kernel: options.kernel,
    alpha,
    upperBound: upper,
    b,
    w: res.w,
    wNormSquared: res.wNormSquared,
    decision: res.decision,
    iterations,
    converged,
    maxKktViolation,
    ...cert,
  };
}
