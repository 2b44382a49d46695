/**
 * Model selection: C (and gamma for the RBF kernel) by stratified, seeded k-fold cross-validation on a
 * log2 grid.
 *
 * Criterion: cross-validated accuracy (pooled over the held-out folds; multi-class: arg-max of the
 * one-vs-rest scores). Ties go to the smaller C (the wider margin), then the smaller gamma (the
 * smoother boundary). The mean out-of-fold hinge loss is reported beside the accuracy.
 *
 * Warm start along the grid: within one fold and one gamma, C is visited in increasing order and each
 * solve starts from the previous C's α. That α is feasible for the larger C (0 ≤ α ≤ C_prev < C, and
 * Σαᵢyᵢ = 0 still holds), so the solver starts close to the new optimum instead of from zero; the
 * optimum itself does not depend on the start, so warm and cold runs agree up to solver tolerance.
 * Preprocessing is fitted on each training part once and reused across the grid.
 */
import { stratifiedKFold } from './folds';
import { decisionValues } from './kernel';
import { applyPreprocessor, fitPreprocessor, selectRows } from './preprocess';
import {
  boundaryLabels,
  boundarySpecs,
  resolveSettings,
  solveBinary,
  validateData,
  type EngineControl,
  type FitSettings,
  type LabelledData,
  type ResolvedFitSettings,
} from './model';
import { EngineInputError, FitCancelledError, type BinaryProblem, type KernelSpec } from './types';

export interface SelectionGrid {
  readonly log2C: readonly number[];
  /** RBF / polynomial only */
  readonly log2Gamma?: readonly number[];
}

/** The ranges LIBSVM's grid.py uses by default: log2 C from −5 to 15, log2 γ from 3 to −15, step 2 (recalled from memory). */
export const DEFAULT_LOG2C: readonly number[] = [-5, -3, -1, 1, 3, 5, 7, 9, 11, 13, 15];
export const DEFAULT_LOG2GAMMA: readonly number[] = [-15, -13, -11, -9, -7, -5, -3, -1, 1, 3];

export interface SelectionOptions {
  readonly grid?: SelectionGrid;
  /** default: settings.folds (5) */
  readonly folds?: number;
  /** default: settings.seed */
  readonly seed?: number;
  /** warm start along increasing C (default true) */
  readonly warmStart?: boolean;
}

export interface SelectionCell {
  readonly log2C: number;
  readonly C: number;
  readonly log2Gamma: number | null;
  readonly gamma: number | null;
  /** pooled cross-validated accuracy */
  readonly accuracy: number;
  /** mean out-of-fold hinge loss max(0, 1 − y·f), averaged over boundaries */
  readonly meanHinge: number;
  /** solver iterations summed over folds and boundaries */
  readonly iterations: number;
  readonly converged: boolean;
}

export interface SelectionResult {
  /** grid cells, by gamma then C ascending */
  readonly cells: readonly SelectionCell[];
  readonly best: SelectionCell;
  readonly folds: number;
  readonly seed: number;
  readonly warmStart: boolean;
  readonly criterion: 'cv-accuracy';
}

function withGamma(kernel: KernelSpec, gamma: number | null): KernelSpec {
  if (gamma === null || kernel.type === 'linear') return kernel;
  return { ...kernel, gamma };
}

export function selectModel(data: LabelledData, settings: FitSettings, options: SelectionOptions = {}, control: EngineControl = {}): SelectionResult {
  const base = resolveSettings(settings);
  if (base.hard) throw new EngineInputError('model selection tunes C; it does not apply to hard-margin mode');
  const classes = validateData(data);
  const grid = options.grid ?? { log2C: DEFAULT_LOG2C, log2Gamma: base.kernel.type === 'rbf' ? DEFAULT_LOG2GAMMA : undefined };
  if (grid.log2C.length === 0) throw new EngineInputError('the C grid is empty');
  for (const v of [...grid.log2C, ...(grid.log2Gamma ?? [])]) {
    if (!Number.isFinite(v)) throw new EngineInputError(`grid exponents must be finite, got ${v}`);
  }
  if (grid.log2Gamma && base.kernel.type === 'linear') throw new EngineInputError('a gamma grid needs the rbf or poly kernel');
  const log2C = [...new Set(grid.log2C)].sort((a, b) => a - b);
  const log2G: (number | null)[] = grid.log2Gamma && grid.log2Gamma.length ? [...new Set(grid.log2Gamma)].sort((a, b) => a - b) : [null];
  const k = options.folds ?? base.folds;
  const seed = options.seed ?? base.seed;
  const warm = options.warmStart ?? true;
  const { folds } = stratifiedKFold(data.labels, k, seed);
  const specs = boundarySpecs(classes);
  const n = data.ids.length;
  const classPos = new Map(classes.map((c, i) => [c, i]));
  const classIndex = Int32Array.from(data.labels, (l) => classPos.get(l) as number);

  // Per fold: preprocessed training and test rows (fitted on the training part only).
  const prepared = folds.map((fold) => {
    const Xtr = selectRows(data.X, fold.train);
    const pre = fitPreprocessor(Xtr, base.scale);
    const trainLabels = Array.from(fold.train, (i) => data.labels[i]);
    return {
      fold,
      Xtr: applyPreprocessor(pre, Xtr),
      Xte: applyPreprocessor(pre, selectRows(data.X, fold.test)),
      ys: specs.map((s) => boundaryLabels(trainLabels, s.positive)),
    };
  });

  const cells: SelectionCell[] = [];
  let stageStep = 0;
  const stageTotal = log2G.length * folds.length;
  for (const lg of log2G) {
    const gamma = lg === null ? null : 2 ** lg;
    // scores[c][b][i]: out-of-fold decision of sample i for C index c and boundary b
    const scores = log2C.map(() => specs.map(() => new Float64Array(n)));
    const iterations = new Float64Array(log2C.length);
    const converged = log2C.map(() => true);
    for (let fi = 0; fi < prepared.length; fi++) {
      const p = prepared[fi];
      if (control.signal?.aborted) throw new FitCancelledError();
      control.onStage?.({
        stage: 'grid',
        step: ++stageStep,
        of: stageTotal,
        label: `${gamma === null ? '' : `gamma ${gamma}, `}fold ${fi + 1} of ${prepared.length}`,
      });
      const prev: (Float64Array | undefined)[] = specs.map(() => undefined);
      log2C.forEach((lc, c) => {
        const s: ResolvedFitSettings = { ...base, C: 2 ** lc, kernel: withGamma(base.kernel, gamma) };
        specs.forEach((_, b) => {
          const problem: BinaryProblem = { X: p.Xtr, y: p.ys[b] };
          const sol = solveBinary(problem, s, control, warm && prev[b] ? { warmStart: prev[b] } : {});
          prev[b] = sol.alpha;
          iterations[c] += sol.iterations;
          if (!sol.converged) converged[c] = false;
          const f = decisionValues(problem, sol, p.Xte);
          p.fold.test.forEach((i, r) => (scores[c][b][i] = f[r]));
        });
      });
    }
    log2C.forEach((lc, c) => {
      let correct = 0;
      let hinge = 0;
      for (let i = 0; i < n; i++) {
        let pred: number;
        if (specs.length === 1) {
          const f = scores[c][0][i];
          pred = f > 0 ? 1 : 0;
          const y = classIndex[i] === 1 ? 1 : -1;
          hinge += Math.max(0, 1 - y * f);
        } else {
          pred = 0;
          for (let b = 0; b < specs.length; b++) {
            const f = scores[c][b][i];
            if (f > scores[c][pred][i]) pred = b;
            const y = classIndex[i] === b ? 1 : -1;
            hinge += Math.max(0, 1 - y * f) / specs.length;
          }
        }
        if (pred === classIndex[i]) correct++;
      }
      cells.push({
        log2C: lc,
        C: 2 ** lc,
        log2Gamma: lg,
        gamma,
        accuracy: correct / n,
        meanHinge: hinge / n,
        iterations: iterations[c],
        converged: converged[c],
      });
    });
  }
  let best = cells[0];
  for (const cell of cells) {
    if (
      cell.accuracy > best.accuracy ||
      (cell.accuracy === best.accuracy && (cell.C < best.C || (cell.C === best.C && (cell.gamma ?? 0) < (best.gamma ?? 0))))
    ) {
      best = cell;
    }
  }
  return { cells, best, folds: k, seed, warmStart: warm, criterion: 'cv-accuracy' };
}
