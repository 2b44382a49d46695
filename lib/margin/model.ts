/**
 * The fit API: labelled samples + settings → boundaries, standings, pivots and certificates.
 *
 * - Classes are the distinct labels sorted by code-unit order. Two classes give one boundary with
 *   y = +1 for classes[1] and y = −1 for classes[0]. More classes give one-vs-rest boundaries, one per
 *   class in class order (y = +1 for that class); a sample's multi-class margin is its own class's
 *   score minus the best other class's score, its predicted class is the arg-max (ties to the lower
 *   class index), and the pairwise confusion matrix counts [true class][predicted class].
 * - The solver is the one asked for; there is no fallback to another solver. `dcd` accepts the
 *   linear kernel only; `squared-hinge` needs `dcd`.
 * - `hard: true` asks for the hard margin (hard-margin.ts): when the data are separable the
 *   maximum-margin hyperplane is returned with its certificate; when not, the boundary says so
 *   (`separable: false`, wrong-side count) and its standings are those of the best hyperplane found,
 *   with only the wrong-side flag (a margin does not exist), no support vectors and no pivots.
 * - Preprocessing is fitted on the rows given here (the training revision) and stored in the result.
 */
import { solveSmo } from './smo';
import { solveDcd, type PreviousSolution } from './dcd';
import { decideHardMargin } from './hard-margin';
import { fillKernelRow, rowSquaredNorms, validateKernel } from './kernel';
import { applyPreprocessor, fitPreprocessor, selectRows, type Preprocessor, type ScaleKind } from './preprocess';
import { compareStrings } from './random';
import {
  computePivots,
  DEFAULT_PIVOT_CAP,
  DEFAULT_PIVOT_THRESHOLD,
  marginWidthOf,
  weightNorm,
  type PivotReport,
} from './pivots';
import {
  computeStandings,
  countStandings,
  DEFAULT_MARGIN_TOLERANCE,
  DEFAULT_NEAR_BAND,
  FLAG_INSIDE_MARGIN,
  FLAG_NEAR_BOUNDARY,
  FLAG_PIVOT,
  FLAG_WRONG_SIDE,
  type BoundaryStandings,
  type StandingCounts,
} from './standings';
import {
  EngineInputError,
  FitCancelledError,
  type BinaryProblem,
  type BinarySolution,
  type DenseRows,
  type Formulation,
  type KernelSpec,
  type LabelledData,
  type SolverControl,
} from './types';

export type { LabelledData };

export type SolverKind = 'smo' | 'dcd';

export interface FitSettings {
  readonly kernel: KernelSpec;
  /** soft-margin cost C > 0 (ignored when `hard`) */
  readonly C: number;
  readonly solver: SolverKind;
  /** hard-margin mode (default false) */
  readonly hard?: boolean;
  /** solver stopping tolerance (default: smo 1e-3, dcd 0.1 — the LIBSVM / LIBLINEAR defaults) */
  readonly tol?: number;
  /** dcd only (default 'hinge') */
  readonly loss?: 'hinge' | 'squared-hinge';
  readonly scale: ScaleKind;
  /** seed for dcd's permutation and for fold assignment */
  readonly seed: number;
  /** near-boundary band in margin half-widths: |f(x)| ≤ nearBand (default 0.5) */
  readonly nearBand?: number;
  /** inside-margin tolerance on y·f(x) (default 1e-3) */
  readonly marginTolerance?: number;
  /** relative change of margin width that makes a support vector a pivot (default 0.05) */
  readonly pivotThreshold?: number;
  /** most support vectors refitted per boundary for pivots (default 50; 0 disables pivots) */
  readonly pivotCap?: number;
  /** folds for out-of-fold margins (audit, default 5) */
  readonly folds?: number;
  /** 'balanced': Cᵢ = C·n / (2·n_class(i)) per boundary (default 'none') */
  readonly classWeights?: 'balanced' | 'none';
  readonly shrinking?: boolean;
  readonly cacheBytes?: number;
  readonly maxIterations?: number;
  /** duals of a previous fit (see `warmStartFrom`), matched by sample id and boundary */
  readonly warmStart?: WarmStart;
}

/** Settings with every default filled in, as stored with a fit (no warm start). */
export interface ResolvedFitSettings {
  readonly kernel: KernelSpec;
  readonly C: number;
  readonly solver: SolverKind;
  readonly hard: boolean;
  readonly tol: number;
  readonly loss: 'hinge' | 'squared-hinge';
  readonly scale: ScaleKind;
  readonly seed: number;
  readonly nearBand: number;
  readonly marginTolerance: number;
  readonly pivotThreshold: number;
  readonly pivotCap: number;
  readonly folds: number;
  readonly classWeights: 'balanced' | 'none';
  readonly shrinking: boolean;
  readonly cacheBytes: number | null;
  readonly maxIterations: number | null;
}

export interface WarmStart {
  readonly ids: readonly string[];
  readonly boundaries: readonly WarmBoundary[];
}

/** One boundary of a warm start; arrays in the warm start's `ids` order. */
export interface WarmBoundary {
  readonly positive: string;
  readonly negative: readonly string[];
  readonly alpha: Float64Array;
  /**
   * The whole previous solution of a linear DCD boundary with its ±1 targets (optional). When a fit
   * has the same rows in the same order (a refit after relabels) the DCD solver starts from it
   * (dcd.ts `warmStartFrom`: w̃ corrected by the changed αᵢyᵢ only, the first active set from its
   * decision values) instead of from α alone, which costs a rebuild of w̃ and a full pass first.
   */
  readonly previous?: { readonly solution: PreviousSolution; readonly y: Int8Array };
}

/** A stage of a multi-fit job, for progress display. */
export interface EngineStage {
  readonly stage: 'fit' | 'pivots' | 'fold' | 'grid';
  readonly step: number;
  readonly of: number;
  readonly label: string;
}

export interface EngineControl extends SolverControl {
  readonly onStage?: (stage: EngineStage) => void;
}

export type HardMarginOutcome =
  | { readonly separable: true; readonly minFunctionalMargin: number }
  | { readonly separable: false; readonly reason: string; readonly wrongSideCount: number };

/** Support vectors of a non-linear boundary, enough to evaluate f on new rows. */
export interface SupportVectors {
  readonly index: Int32Array;
  /** preprocessed rows of the support vectors */
  readonly rows: DenseRows;
  /** αᵢyᵢ */
  readonly coef: Float64Array;
}

export interface BoundaryResult {
  readonly positive: string;
  readonly negative: readonly string[];
  /** e.g. "malignant vs benign", "setosa vs rest" */
  readonly name: string;
  readonly y: Int8Array;
  /**
   * The solver's solution (alpha, b, w, certificates, decision on the training rows). For a
   * non-separable hard-margin verdict: the best hyperplane found with α = 0 and NaN certificates.
   */
  readonly solution: BinarySolution;
  readonly formulation: Formulation | 'hard-margin';
  readonly hardMargin: HardMarginOutcome | null;
  /** true: the fitted hyperplane separates the training rows (a certificate); false: hard-margin
   * verdict "not separable"; null: soft fit with training errors (not decided). */
  readonly separable: boolean | null;
  /** ‖w‖ (kernel: in feature space) */
  readonly wNorm: number;
  /** 2/‖w‖; NaN for a non-separable hard-margin verdict */
  readonly marginWidth: number;
  readonly standings: BoundaryStandings;
  readonly counts: StandingCounts;
  readonly pivots: PivotReport | null;
  /** non-linear kernels only */
  readonly supportVectors: SupportVectors | null;
}

export interface MulticlassSummary {
  /** own class score − best other class score, per sample */
  readonly margin: Float64Array;
  /** predicted class index (arg-max of the one-vs-rest scores) */
  readonly predicted: Int32Array;
  /** confusion[t][p]: samples of class t predicted as class p */
  readonly confusion: number[][];
  readonly accuracy: number;
}

/**
 * Per-sample summary over all boundaries. Binary: the boundary's own columns. Multi-class:
 * decision = own class's one-vs-rest score; margin = multi-class margin; distance and alpha from the
 * own class's boundary; flags = union over all boundaries.
 */
export interface SampleSummary {
  readonly decision: Float64Array;
  readonly margin: Float64Array;
  readonly distance: Float64Array;
  readonly alpha: Float64Array;
  readonly flags: Uint8Array;
  /** predicted class index */
  readonly predicted: Int32Array;
}

export interface FitResult {
  readonly classes: readonly string[];
  readonly ids: readonly string[];
  readonly labels: readonly string[];
  /** class index of every sample */
  readonly classIndex: Int32Array;
  readonly settings: ResolvedFitSettings;
  readonly preprocessor: Preprocessor;
  readonly boundaries: readonly BoundaryResult[];
  readonly samples: SampleSummary;
  readonly multiclass: MulticlassSummary | null;
}

const SOLVER_DEFAULT_TOL: Record<SolverKind, number> = { smo: 1e-3, dcd: 0.1 };

function positiveNumber(name: string, v: number): number {
  if (!(typeof v === 'number' && Number.isFinite(v) && v > 0)) throw new EngineInputError(`${name} must be a positive finite number, got ${v}`);
  return v;
}

function nonNegative(name: string, v: number): number {
  if (!(typeof v === 'number' && Number.isFinite(v) && v >= 0)) throw new EngineInputError(`${name} must be a non-negative finite number, got ${v}`);
  return v;
}

/** Validates the settings and fills in the defaults. */
export function resolveSettings(settings: FitSettings): ResolvedFitSettings {
  const { kernel, solver } = settings;
  if (solver !== 'smo' && solver !== 'dcd') throw new EngineInputError(`unknown solver "${String(solver)}" (expected smo or dcd)`);
  if (!kernel || !['linear', 'rbf', 'poly'].includes(kernel.type)) {
    throw new EngineInputError(`unknown kernel "${String(kernel?.type)}" (expected linear, rbf or poly)`);
  }
  validateKernel(kernel);
  const hard = settings.hard ?? false;
  if (solver === 'dcd' && kernel.type !== 'linear') {
    throw new EngineInputError(`solver dcd solves the linear kernel only; use solver smo for the ${kernel.type} kernel`);
  }
  const loss = settings.loss ?? 'hinge';
  if (loss !== 'hinge' && loss !== 'squared-hinge') throw new EngineInputError(`unknown loss "${String(loss)}"`);
  if (loss === 'squared-hinge' && solver !== 'dcd') throw new EngineInputError('the squared hinge loss needs solver dcd');
  if (hard && solver !== 'smo') {
    throw new EngineInputError('hard-margin mode runs its exact separability test and SMO with C = ∞; it needs solver smo, not dcd');
  }
  if (hard && kernel.type !== 'linear') {
    throw new EngineInputError(`hard-margin mode decides linear separability; it needs the linear kernel, not ${kernel.type}`);
  }
  if (!hard) positiveNumber('C', settings.C);
  const tol = settings.tol === undefined ? SOLVER_DEFAULT_TOL[solver] : positiveNumber('tol', settings.tol);
  if (!['standard', 'l2', 'none'].includes(settings.scale)) {
    throw new EngineInputError(`unknown scale "${String(settings.scale)}" (expected standard, l2 or none)`);
  }
  if (!Number.isSafeInteger(settings.seed)) throw new EngineInputError(`seed must be an integer, got ${settings.seed}`);
  const pivotCap = settings.pivotCap ?? DEFAULT_PIVOT_CAP;
  if (!Number.isInteger(pivotCap) || pivotCap < 0) throw new EngineInputError(`pivotCap must be a non-negative integer, got ${pivotCap}`);
  const folds = settings.folds ?? 5;
  if (!Number.isInteger(folds) || folds < 2) throw new EngineInputError(`folds must be an integer ≥ 2, got ${folds}`);
  const classWeights = settings.classWeights ?? 'none';
  if (classWeights !== 'balanced' && classWeights !== 'none') throw new EngineInputError(`unknown classWeights "${String(classWeights)}"`);
  if (settings.maxIterations !== undefined && !(Number.isInteger(settings.maxIterations) && settings.maxIterations > 0)) {
    throw new EngineInputError(`maxIterations must be a positive integer, got ${settings.maxIterations}`);
  }
  return {
    kernel,
    C: hard ? Infinity : settings.C,
    solver,
    hard,
    tol,
    loss,
    scale: settings.scale,
    seed: settings.seed,
    nearBand: nonNegative('nearBand', settings.nearBand ?? DEFAULT_NEAR_BAND),
    marginTolerance: nonNegative('marginTolerance', settings.marginTolerance ?? DEFAULT_MARGIN_TOLERANCE),
    pivotThreshold: nonNegative('pivotThreshold', settings.pivotThreshold ?? DEFAULT_PIVOT_THRESHOLD),
    pivotCap,
    folds,
    classWeights,
    shrinking: settings.shrinking ?? true,
    cacheBytes: settings.cacheBytes ?? null,
    maxIterations: settings.maxIterations ?? null,
  };
}

/** Checks shapes, finiteness, unique ids and ≥ 2 classes; returns the sorted classes. */
export function validateData(data: LabelledData): string[] {
  const { ids, labels, X } = data;
  const n = X.rows;
  if (!Number.isInteger(n) || !Number.isInteger(X.cols) || X.cols < 1) throw new EngineInputError(`bad matrix shape ${X.rows} × ${X.cols}`);
  if (X.data.length !== n * X.cols) throw new EngineInputError(`matrix has ${X.data.length} entries, expected ${n} × ${X.cols}`);
  if (ids.length !== n) throw new EngineInputError(`${ids.length} ids for ${n} rows`);
  if (labels.length !== n) throw new EngineInputError(`${labels.length} labels for ${n} rows`);
  const d = X.cols;
  // x·0 is 0 for a finite x and NaN for ±∞ or NaN: one branch-free pass over the matrix finds out
  // whether there is anything to report (a refit of 100,000 × 256 rows pays this on every run).
  const values = X.data;
  let probe = 0;
  for (let k = 0; k < values.length; k++) probe += values[k] * 0;
  if (probe !== 0) {
    for (let k = 0; k < values.length; k++) {
      if (!Number.isFinite(values[k])) {
        const i = Math.floor(k / d);
        throw new EngineInputError(`feature ${(k % d) + 1} of sample "${ids[i]}" (row ${i + 1}) is not finite (${values[k]})`);
      }
    }
  }
  const seen = new Set<string>();
  for (const id of ids) {
    if (seen.has(id)) throw new EngineInputError(`duplicate sample id "${id}"`);
    seen.add(id);
  }
  const classes = [...new Set(labels)].sort(compareStrings);
  if (classes.length < 2) throw new EngineInputError(`only one class (${classes.length ? `"${classes[0]}"` : 'none'}); at least two classes are needed`);
  return classes;
}

interface BoundarySpec {
  readonly positive: string;
  readonly negative: readonly string[];
  readonly name: string;
}

export function boundarySpecs(classes: readonly string[]): BoundarySpec[] {
  if (classes.length === 2) return [{ positive: classes[1], negative: [classes[0]], name: `${classes[1]} vs ${classes[0]}` }];
  return classes.map((c) => ({ positive: c, negative: classes.filter((o) => o !== c), name: `${c} vs rest` }));
}

/** Labels ±1 of a boundary (y = +1 for the positive class). */
export function boundaryLabels(labels: readonly string[], positive: string): Int8Array {
  const y = new Int8Array(labels.length);
  for (let i = 0; i < labels.length; i++) y[i] = labels[i] === positive ? 1 : -1;
  return y;
}

function balancedWeights(y: Int8Array): { positive: number; negative: number } {
  let pos = 0;
  for (let i = 0; i < y.length; i++) if (y[i] > 0) pos++;
  const neg = y.length - pos;
  return { positive: y.length / (2 * pos), negative: y.length / (2 * neg) };
}

export interface SolveExtras {
  readonly upperBound?: Float64Array;
  readonly warmStart?: Float64Array;
  /** DCD only: a previous solution of the same rows and its targets (see WarmBoundary.previous). */
  readonly warmStartFrom?: { readonly previous: PreviousSolution; readonly previousY: Int8Array };
}

/** Runs the requested soft-margin solver on one binary problem (no fallback). */
export function solveBinary(problem: BinaryProblem, s: ResolvedFitSettings, control: SolverControl, extras: SolveExtras = {}): BinarySolution {
  const common = {
    onProgress: control.onProgress,
    progressEvery: control.progressEvery,
    signal: control.signal,
    C: s.C,
    tol: s.tol,
    shrinking: s.shrinking,
    ...(s.maxIterations !== null ? { maxIterations: s.maxIterations } : {}),
    ...(extras.upperBound ? { upperBound: extras.upperBound } : s.classWeights === 'balanced' ? { classWeights: balancedWeights(problem.y) } : {}),
    ...(extras.warmStart ? { warmStart: extras.warmStart } : {}),
  };
  if (s.solver === 'smo') {
    return solveSmo(problem, { ...common, kernel: s.kernel, ...(s.cacheBytes !== null ? { cacheBytes: s.cacheBytes } : {}) });
  }
  return solveDcd(problem, { ...common, loss: s.loss, seed: s.seed, ...(extras.warmStartFrom ? { warmStartFrom: extras.warmStartFrom } : {}) });
}

function checkCancelled(control: SolverControl): void {
  if (control.signal?.aborted) throw new FitCancelledError();
}

/**
 * Where each current sample sat in the warm start's rows (−1: not there), worked out once per fit
 * for all boundaries. The common case — the same samples in the same order, a refit after label
 * changes — is recognised by comparing the id lists and needs no lookup table.
 */
function warmRowsFor(warm: WarmStart, ids: readonly string[]): { readonly rows: Int32Array; readonly same: boolean } {
  const rows = new Int32Array(ids.length);
  let same = warm.ids.length === ids.length;
  for (let i = 0; same && i < ids.length; i++) same = warm.ids[i] === ids[i];
  if (same) {
    for (let i = 0; i < ids.length; i++) rows[i] = i;
    return { rows, same };
  }
  const prev = new Map<string, number>();
  for (let i = 0; i < warm.ids.length; i++) prev.set(warm.ids[i], i);
  for (let i = 0; i < ids.length; i++) rows[i] = prev.get(ids[i]) ?? -1;
  return { rows, same };
}

function warmBoundaryFor(warm: InternalSettings['warmStartInternal'], spec: BoundarySpec): WarmBoundary | undefined {
  if (!warm) return undefined;
  const key = [...spec.negative].sort(compareStrings).join('\u0000');
  return warm.start.boundaries.find((b) => b.positive === spec.positive && [...b.negative].sort(compareStrings).join('\u0000') === key);
}

/**
 * How the solver of one boundary starts: from the previous solution when the rows are the warm
 * start's own and both fits use linear DCD, else from the previous α matched by id (or cold).
 */
function warmExtrasFor(s: InternalSettings, spec: BoundarySpec): SolveExtras {
  const warm = s.warmStartInternal;
  const match = warmBoundaryFor(warm, spec);
  if (!warm || !match) return {};
  const prev = match.previous;
  if (warm.same && prev && s.solver === 'dcd' && prev.solution.formulation === 'dcd-regularised-bias' && prev.solution.w !== null && prev.y.length === warm.rows.length) {
    return { warmStartFrom: { previous: prev.solution, previousY: prev.y } };
  }
  return { warmStart: warmAlphaFor(warm, match) };
}

function warmAlphaFor(warm: NonNullable<InternalSettings['warmStartInternal']>, match: WarmBoundary): Float64Array {
  const alpha = new Float64Array(warm.rows.length);
  for (let i = 0; i < warm.rows.length; i++) {
    const j = warm.rows[i];
    if (j >= 0) alpha[i] = match.alpha[j];
  }
  return alpha;
}

/** The warm start a later fit can reuse: every boundary's α keyed by sample id, and its whole solution (see WarmBoundary). */
export function warmStartFrom(result: FitResult): WarmStart {
  return {
    ids: result.ids,
    boundaries: result.boundaries.map((b) => ({ positive: b.positive, negative: b.negative, alpha: b.solution.alpha, previous: { solution: b.solution, y: b.y } })),
  };
}

function linearDecision(X: DenseRows, w: Float64Array, b: number): Float64Array {
  const d = X.cols;
  const out = new Float64Array(X.rows);
  for (let i = 0; i < X.rows; i++) {
    let s = b;
    for (let j = 0; j < d; j++) s += w[j] * X.data[i * d + j];
    out[i] = s;
  }
  return out;
}

function packSupport(X: DenseRows, y: Int8Array, alpha: Float64Array): SupportVectors {
  const idx: number[] = [];
  for (let i = 0; i < alpha.length; i++) if (alpha[i] > 0) idx.push(i);
  const index = Int32Array.from(idx);
  const coef = new Float64Array(idx.length);
  for (let s = 0; s < idx.length; s++) coef[s] = alpha[idx[s]] * y[idx[s]];
  return { index, rows: selectRows(X, index), coef };
}

function allSeparated(y: Int8Array, decision: Float64Array): boolean {
  for (let i = 0; i < y.length; i++) if (!(y[i] * decision[i] > 0)) return false;
  return true;
}

/** Settings inside one fit: the warm start with each current row's place in it (see warmRowsFor). */
type InternalSettings = ResolvedFitSettings & { readonly warmStartInternal?: { readonly start: WarmStart; readonly rows: Int32Array; readonly same: boolean } };

function fitBoundary(
  Xp: DenseRows,
  data: LabelledData,
  spec: BoundarySpec,
  s: InternalSettings,
  control: EngineControl,
  step: number,
  of: number,
): BoundaryResult {
  const y = boundaryLabels(data.labels, spec.positive);
  const problem: BinaryProblem = { X: Xp, y };
  control.onStage?.({ stage: 'fit', step, of, label: spec.name });
  checkCancelled(control);
  if (s.hard) return fitHardBoundary(problem, spec, s, control);
  const solution = solveBinary(problem, s, control, warmExtrasFor(s, spec));
  const wNorm = weightNorm(solution);
  let pivots: PivotReport | null = null;
  if (s.pivotCap > 0) {
    pivots = computePivots(
      solution,
      (i, warm) => {
        const ub = Float64Array.from(solution.upperBound);
        ub[i] = 0;
        return solveBinary(problem, s, { signal: control.signal }, { upperBound: ub, warmStart: warm });
      },
      pivotOptions(spec, s, control),
    );
  }
  const standings = standingsOf(y, solution, wNorm, s, pivots);
  return {
    positive: spec.positive,
    negative: spec.negative,
    name: spec.name,
    y,
    solution,
    formulation: solution.formulation,
    hardMargin: null,
    separable: allSeparated(y, solution.decision) ? true : null,
    wNorm,
    marginWidth: 2 / wNorm,
    standings,
    counts: countStandings(standings),
    pivots,
    supportVectors: s.kernel.type === 'linear' ? null : packSupport(Xp, y, solution.alpha),
  };
}

/** Options of a boundary's pivot refits: the project's threshold and cap, progress as a stage. */
function pivotOptions(spec: BoundarySpec, s: ResolvedFitSettings, control: EngineControl) {
  return {
    threshold: s.pivotThreshold,
    cap: s.pivotCap,
    signal: control.signal,
    onStep: (k: number, total: number) => control.onStage?.({ stage: 'pivots', step: k, of: total, label: spec.name }),
  };
}

/** Standings of every training sample against one fitted boundary. */
function standingsOf(y: Int8Array, solution: BinarySolution, wNorm: number, s: ResolvedFitSettings, pivots: PivotReport | null) {
  return computeStandings(
    { y, decision: solution.decision, alpha: solution.alpha, upperBound: solution.upperBound, wNorm },
    { nearBand: s.nearBand, marginTolerance: s.marginTolerance, pivots: pivots?.pivots },
  );
}

function fitHardBoundary(problem: BinaryProblem, spec: BoundarySpec, s: ResolvedFitSettings, control: EngineControl): BoundaryResult {
  const verdict = decideHardMargin(problem, { tol: s.tol, signal: control.signal, onProgress: control.onProgress, progressEvery: control.progressEvery });
  const { y } = problem;
  if (verdict.separable) {
    const solution = verdict.solution;
    const wNorm = weightNorm(solution);
    let pivots: PivotReport | null = null;
    if (s.pivotCap > 0) {
      pivots = computePivots(
        solution,
        (i) => {
          // Hard margin: refit on the rows without sample i (still separable).
          const keep = new Int32Array(y.length - 1);
          for (let r = 0, k = 0; r < y.length; r++) if (r !== i) keep[k++] = r;
          const sub: BinaryProblem = { X: selectRows(problem.X, keep), y: Int8Array.from(keep, (r) => y[r]) };
          const v = decideHardMargin(sub, { tol: s.tol, signal: control.signal });
          if (!v.separable) throw new EngineInputError(`hard-margin refit without sample ${i} lost separability: ${v.reason}`);
          return v.solution;
        },
        pivotOptions(spec, s, control),
      );
    }
    const standings = standingsOf(y, solution, wNorm, s, pivots);
    return {
      positive: spec.positive,
      negative: spec.negative,
      name: spec.name,
      y,
      solution,
      formulation: 'hard-margin',
      hardMargin: { separable: true, minFunctionalMargin: verdict.minFunctionalMargin },
      separable: true,
      wNorm,
      marginWidth: verdict.marginWidth,
      standings,
      counts: countStandings(standings),
      pivots,
      supportVectors: null,
    };
  }
  const { w, b } = verdict.bestHyperplane;
  const decision = linearDecision(problem.X, w, b);
  let w2 = 0;
  for (let j = 0; j < w.length; j++) w2 += w[j] * w[j];
  const wNorm = Math.sqrt(w2);
  const n = y.length;
  const solution: BinarySolution = {
    formulation: 'smo-unregularised-bias',
    kernel: s.kernel,
    alpha: new Float64Array(n),
    upperBound: new Float64Array(n).fill(Infinity),
    b,
    w: Float64Array.from(w),
    wNormSquared: w2,
    decision,
    iterations: 0,
    primalObjective: NaN,
    dualObjective: NaN,
    dualityGap: NaN,
    maxKktViolation: NaN,
    converged: false,
  };
  const standings = computeStandings({ y, decision, alpha: solution.alpha, upperBound: solution.upperBound, wNorm }, { wrongSideOnly: true });
  return {
    positive: spec.positive,
    negative: spec.negative,
    name: spec.name,
    y,
    solution,
    formulation: 'hard-margin',
    hardMargin: { separable: false, reason: verdict.reason, wrongSideCount: verdict.wrongSideCount },
    separable: false,
    wNorm,
    marginWidth: NaN,
    standings,
    counts: countStandings(standings),
    pivots: null,
    supportVectors: null,
  };
}

/** Multi-class margins, predictions and confusion from one-vs-rest scores. */
export function multiclassFromScores(scores: readonly Float64Array[], classIndex: Int32Array): MulticlassSummary {
  const K = scores.length;
  const n = classIndex.length;
  const margin = new Float64Array(n);
  const predicted = new Int32Array(n);
  const confusion = Array.from({ length: K }, () => new Array<number>(K).fill(0));
  let correct = 0;
  for (let i = 0; i < n; i++) {
    const own = classIndex[i];
    let best = 0;
    let bestOther = -Infinity;
    for (let k = 0; k < K; k++) {
      const v = scores[k][i];
      if (v > scores[best][i]) best = k;
      if (k !== own && v > bestOther) bestOther = v;
    }
    margin[i] = scores[own][i] - bestOther;
    predicted[i] = best;
    confusion[own][best]++;
    if (best === own) correct++;
  }
  return { margin, predicted, confusion, accuracy: n ? correct / n : NaN };
}

/**
 * Fits the margin classifier(s) for labelled data.
 * @throws EngineInputError for unusable data or settings; FitCancelledError when `control.signal` aborts.
 */
export function fitMargins(data: LabelledData, settings: FitSettings, control: EngineControl = {}): FitResult {
  const resolved = resolveSettings(settings);
  const classes = validateData(data);
  const warm = resolved.hard ? undefined : settings.warmStart;
  const s: InternalSettings = { ...resolved, warmStartInternal: warm ? { start: warm, ...warmRowsFor(warm, data.ids) } : undefined };
  const classIndex = new Int32Array(data.labels.length);
  const classPos = new Map(classes.map((c, k) => [c, k]));
  for (let i = 0; i < data.labels.length; i++) classIndex[i] = classPos.get(data.labels[i]) as number;
  const preprocessor = fitPreprocessor(data.X, resolved.scale);
  const Xp = applyPreprocessor(preprocessor, data.X);
  const specs = boundarySpecs(classes);
  const boundaries = specs.map((spec, b) => fitBoundary(Xp, data, spec, s, control, b + 1, specs.length));
  const n = data.ids.length;
  let samples: SampleSummary;
  let multiclass: MulticlassSummary | null = null;
  if (boundaries.length === 1) {
    const st = boundaries[0].standings;
    const predicted = new Int32Array(n);
    for (let i = 0; i < n; i++) predicted[i] = st.decision[i] > 0 ? 1 : 0;
    samples = { decision: st.decision, margin: st.margin, distance: st.distance, alpha: st.alpha, flags: st.flags, predicted };
  } else {
    multiclass = multiclassFromScores(
      boundaries.map((b) => b.standings.decision),
      classIndex,
    );
    const decision = new Float64Array(n);
    const distance = new Float64Array(n);
    const alpha = new Float64Array(n);
    const flags = new Uint8Array(n);
    for (let i = 0; i < n; i++) {
      const own = boundaries[classIndex[i]].standings;
      decision[i] = own.decision[i];
      distance[i] = own.distance[i];
      alpha[i] = own.alpha[i];
      let f = 0;
      for (const b of boundaries) f |= b.standings.flags[i];
      flags[i] = f;
    }
    samples = { decision, margin: multiclass.margin, distance, alpha, flags, predicted: multiclass.predicted };
  }
  return {
    classes,
    ids: [...data.ids],
    labels: [...data.labels],
    classIndex,
    settings: resolved,
    preprocessor,
    boundaries,
    samples,
    multiclass,
  };
}

/**
 * Decision values of a fitted result on new raw rows (the stored preprocessor is applied):
 * one Float64Array per boundary.
 */
export function decisionFunction(result: FitResult, X: DenseRows): Float64Array[] {
  const Xp = applyPreprocessor(result.preprocessor, X);
  return result.boundaries.map((b) => {
    const sol = b.solution;
    if (sol.w) return linearDecision(Xp, sol.w, sol.b);
    const sv = b.supportVectors;
    if (!sv) throw new EngineInputError(`boundary ${b.name} has neither a weight vector nor support vectors`);
    const kernel = result.settings.kernel;
    const sqX = kernel.type === 'rbf' ? rowSquaredNorms(Xp) : null;
    const sqS = kernel.type === 'rbf' ? rowSquaredNorms(sv.rows) : null;
    const k = new Float64Array(sv.rows.rows);
    const out = new Float64Array(Xp.rows);
    for (let r = 0; r < Xp.rows; r++) {
      fillKernelRow(kernel, Xp.data, r, sv.rows.data, Xp.cols, 0, sv.rows.rows, k, sqX, sqS);
      let f = sol.b;
      for (let t = 0; t < sv.coef.length; t++) f += sv.coef[t] * k[t];
      out[r] = f;
    }
    return out;
  });
}

/** The flag bits, re-exported for callers that work on `SampleSummary.flags`. */
export const FLAGS = {
  wrongSide: FLAG_WRONG_SIDE,
  insideMargin: FLAG_INSIDE_MARGIN,
  nearBoundary: FLAG_NEAR_BOUNDARY,
  pivot: FLAG_PIVOT,
} as const;

export { marginWidthOf };
