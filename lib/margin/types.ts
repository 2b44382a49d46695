/**
 * Shared contracts of the margin engine (lib/margin).
 *
 * Layers, bottom up: kernel → kernel-column cache → solver (SMO, DCD) → problem wrapper
 * (binary / one-vs-rest, preprocessing) → fit API (standings, pivots, out-of-fold audit).
 * Everything here is plain data: typed arrays and plain objects, no classes with hidden state,
 * so results can cross a worker-thread boundary with structured clone.
 */

/** Dense row-major matrix of n rows × d columns: entry (i, j) is data[i * d + j]. */
export interface DenseRows {
  readonly data: Float64Array | Float32Array;
  readonly rows: number;
  readonly cols: number;
}

export type KernelSpec =
  | { readonly type: 'linear' }
  | { readonly type: 'rbf'; readonly gamma: number }
  | { readonly type: 'poly'; readonly gamma: number; readonly degree: number; readonly coef0: number };

/** A binary problem: labels are +1 / −1 (Int8Array), one per row of X. */
export interface BinaryProblem {
  readonly X: DenseRows;
  readonly y: Int8Array;
}

/** Progress report emitted by a solver every so many iterations. */
export interface SolverProgress {
  readonly iteration: number;
  /** Largest KKT violation (SMO: m(α) − M(α); DCD: max PG − min PG) at this point. */
  readonly violation: number;
}

/** Cross-cutting controls every solver accepts. */
export interface SolverControl {
  /** Called at most every `progressEvery` iterations. */
  readonly onProgress?: (p: SolverProgress) => void;
  readonly progressEvery?: number;
  /** Checked between iterations; when aborted the solver throws `FitCancelledError`. */
  readonly signal?: AbortSignal;
}

/**
 * Certificates every fit returns. Objectives are of the minimisation form:
 * primal P(w, b, ξ) = ½‖w‖² + Σ Cᵢ ξᵢ (or ξᵢ² for the squared hinge),
 * dual D(α) = Σ αᵢ − ½ αᵀQα (maximised), so P ≥ D and the gap P − D ≥ 0 at any feasible α.
 */
export interface Certificates {
  readonly iterations: number;
  readonly primalObjective: number;
  readonly dualObjective: number;
  readonly dualityGap: number;
  /** Largest violation of the KKT conditions at the returned point. */
  readonly maxKktViolation: number;
  readonly converged: boolean;
}

/**
 * Which optimisation problem was solved. Margins are only comparable within one formulation and one C.
 * - `smo-unregularised-bias`: C-SVM dual with the equality Σ αᵢ yᵢ = 0, bias from the KKT conditions.
 * - `dcd-regularised-bias`: dual coordinate descent on the augmented problem x̃ = [x, B], w̃ = [w, b];
 *   the bias enters ½‖w̃‖² and there is no equality constraint.
 */
export type Formulation = 'smo-unregularised-bias' | 'dcd-regularised-bias';

export interface BinarySolution extends Certificates {
  readonly formulation: Formulation;
  readonly kernel: KernelSpec;
  /** Dual weights αᵢ ≥ 0, one per training row. */
  readonly alpha: Float64Array;
  /** Per-sample upper bounds actually used (Cᵢ, after class weights); Cᵢ = 0 excludes sample i. */
  readonly upperBound: Float64Array;
  readonly b: number;
  /** Primal weight vector in input space for linear kernels (length d); null for non-linear kernels. */
  readonly w: Float64Array | null;
  /** ‖w‖² (kernel: αᵀQα). Margin width = 2/‖w‖. */
  readonly wNormSquared: number;
  /** Decision values f(xᵢ) on the training rows. */
  readonly decision: Float64Array;
  /** DCD: how the solver started — cold, from previous duals (`warmStart`) or from a previous solution (`warmStartFrom`). */
  readonly start?: 'cold' | 'duals' | 'solution';
}

export class FitCancelledError extends Error {
  constructor() {
    super('fit cancelled');
    this.name = 'FitCancelledError';
  }
}

/** Thrown for input the engine cannot fit (one class only, NaN features, bad options …). */
export class EngineInputError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'EngineInputError';
  }
}

/** Labelled samples as the fit API takes them: one id, one class label and one row of X per sample. */
export interface LabelledData {
  readonly ids: readonly string[];
  readonly labels: readonly string[];
  readonly X: DenseRows;
  /** Feature names (CSV header) or `f1 … fd` (JSON Lines); informational. */
  readonly featureNames?: readonly string[];
}
