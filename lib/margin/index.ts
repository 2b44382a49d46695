/**
 * Borderline's margin engine — the public API.
 *
 * Layers, bottom up (each uses only the ones below it):
 *   types.ts         shared contracts: DenseRows, KernelSpec, BinaryProblem/BinarySolution, certificates, errors
 *   random.ts        seeded helpers on pure-rand (xoroshiro128+): shuffle, permutation, stratified fold assignment
 *   kernel.ts        linear / RBF / polynomial kernels, decision values
 *   smo.ts, dcd.ts   solvers: exact SMO (unregularised bias) and large-scale linear DCD (regularised bias)
 *   hard-margin.ts   linear separability verdict with certificate
 *   preprocess.ts    standard / l2 / none, fitted on the training revision and stored with the model
 *   folds.ts         stratified, seeded k-fold
 *   standings.ts     per-sample decision, margin, distance, slack, α, support kind, flags
 *   pivots.ts        warm-started refits without each support vector → Δ margin width
 *   model.ts         fitMargins: classes, binary or one-vs-rest boundaries, standings, pivots, multi-class summary
 *   audit.ts         out-of-fold margins and the suspicion score (the review queue order)
 *   select.ts        C (and gamma) by cross-validation on a log2 grid, warm-started along C
 *   run-in-worker.ts / worker.ts   any of the jobs above in a worker thread, with progress and cancellation
 *   io.ts, contract.ts, cli.ts     files in, JSON contract out, the `borderline` command line
 *
 * Defaults (FitSettings):
 *   solver       no default — 'smo' (any kernel) or 'dcd' (linear only) must be chosen; no fallback
 *   tol          smo 1e-3, dcd 0.1 (LIBSVM / LIBLINEAR defaults)
 *   loss         'hinge' ('squared-hinge' with dcd only)
 *   classWeights 'none' ('balanced': Cᵢ = C·n / (2·n_class))
 *   nearBand     0.5 margin half-widths: near-boundary ⇔ |f(x)| ≤ 0.5 ⇔ |distance| ≤ 0.5/‖w‖
 *   marginTolerance 1e-3: inside-margin ⇔ 0 ≤ y·f(x) < 1 − 1e-3
 *   pivotThreshold 0.05 (5 % relative change of the margin width); pivotCap 50 support vectors per boundary
 *   folds        5 (audit, model selection); seed is required and reproduces every random choice
 *   select grid  log2 C ∈ {−5, −3, …, 15}; log2 γ ∈ {−15, −13, …, 3} for RBF
 *   CLI          linear kernel, C 1, gamma 1/d, degree 3, coef0 0, solver smo, scale standard, seed 1
 * Results are plain objects and typed arrays (structured-clone-able); nothing keeps global state.
 */
export * from './types';
export { createRng, permutation, shuffleInPlace, stratifiedFoldAssignment, compareStrings, type Rng } from './random';
export { decisionValues, kernelValue, rowSquaredNorms, validateKernel } from './kernel';
export { solveSmo, type SmoOptions } from './smo';
export { solveDcd, type DcdOptions, type PreviousSolution } from './dcd';
export { decideHardMargin, exactSeparabilityTest, type HardMarginOptions, type HardMarginVerdict, type SeparabilityEvidence } from './hard-margin';
export { applyPreprocessor, fitPreprocessor, selectRows, SCALE_KINDS, type Preprocessor, type ScaleKind } from './preprocess';
export { stratifiedKFold, type Fold, type Folds } from './folds';
export {
  computeStandings,
  countStandings,
  flagNames,
  standingAt,
  supportKindName,
  DEFAULT_MARGIN_TOLERANCE,
  DEFAULT_NEAR_BAND,
  FLAG_INSIDE_MARGIN,
  FLAG_NEAR_BOUNDARY,
  FLAG_PIVOT,
  FLAG_WRONG_SIDE,
  SUPPORT_BOUND,
  SUPPORT_FREE,
  SUPPORT_NONE,
  type BoundaryStandings,
  type FlagName,
  type SampleStanding,
  type StandingCounts,
  type SupportKind,
} from './standings';
export {
  computePivots,
  marginWidthOf,
  supportByInfluence,
  weightNorm,
  DEFAULT_PIVOT_CAP,
  DEFAULT_PIVOT_THRESHOLD,
  type PivotEntry,
  type PivotReport,
} from './pivots';
export {
  boundaryLabels,
  boundarySpecs,
  decisionFunction,
  fitMargins,
  multiclassFromScores,
  resolveSettings,
  solveBinary,
  validateData,
  warmStartFrom,
  FLAGS,
  type BoundaryResult,
  type EngineControl,
  type EngineStage,
  type FitResult,
  type FitSettings,
  type HardMarginOutcome,
  type MulticlassSummary,
  type ResolvedFitSettings,
  type SampleSummary,
  type SolverKind,
  type SupportVectors,
  type WarmStart,
} from './model';
export { auditSamples, outOfFoldDecisions, suspicionScore, SUSPICION_WEIGHTS, type AuditResult, type OutOfFold, type RankedSample } from './audit';
export {
  selectModel,
  DEFAULT_LOG2C,
  DEFAULT_LOG2GAMMA,
  type SelectionCell,
  type SelectionGrid,
  type SelectionOptions,
  type SelectionResult,
} from './select';
export { runInWorker, type EngineJob, type JobResult, type RunInWorkerOptions, type WorkerMessage, type WorkerProgress } from './run-in-worker';
export { InputFileError, detectFormat, readLabelledFile, type InputFormat } from './io';
export { auditJson, boundaryJson, fitJson, type AuditJson, type BoundaryJson, type FitJson, type ModelJson, type SampleJson } from './contract';
