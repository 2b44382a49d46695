/**
 * Pivots: support vectors the boundary hinges on.
 *
 * For each support vector i, the boundary is refitted without it (Cᵢ = 0, warm-started from the
 * full solution with αᵢ set to 0) and the change of the margin width 2/‖w‖ is reported, absolute
 * and relative to the full fit. Non-support vectors are never refitted: their removal leaves the
 * solution unchanged (textbook fact — a sample with α = 0 contributes neither to w nor to the dual
 * objective, and the remaining α still satisfies the KKT conditions of the smaller problem).
 *
 * Refits cost one solver run each, so at most `cap` support vectors are refitted, the most
 * influential first: by α descending (α measures how hard the sample pulls on w = Σαᵢyᵢφ(xᵢ)), ties
 * by index. The report lists which support vectors were computed and which were skipped.
 */
import { FitCancelledError, type BinarySolution } from './types';

export interface PivotEntry {
  /** row index of the support vector */
  readonly index: number;
  readonly alpha: number;
  /** margin width of the refit without this sample */
  readonly marginWidthWithout: number;
  /** marginWidthWithout − full margin width */
  readonly deltaWidth: number;
  /** deltaWidth / full margin width */
  readonly relativeDelta: number;
  readonly isPivot: boolean;
  readonly converged: boolean;
  readonly iterations: number;
}

export interface PivotReport {
  /** relative change of margin width above which a support vector is a pivot */
  readonly threshold: number;
  readonly cap: number;
  readonly supportCount: number;
  readonly marginWidth: number;
  /** refitted support vectors, most influential first */
  readonly computed: readonly PivotEntry[];
  /** support vectors not refitted because of the cap, most influential first */
  readonly skipped: readonly number[];
  /** indices of computed entries with |relativeDelta| > threshold, ascending */
  readonly pivots: readonly number[];
}

export const DEFAULT_PIVOT_THRESHOLD = 0.05;
export const DEFAULT_PIVOT_CAP = 50;

/** Margin width 2/‖w‖ of a solution (from w when present, else from ‖w‖² = αᵀQα). */
export function marginWidthOf(solution: BinarySolution): number {
  return 2 / weightNorm(solution);
}

/** ‖w‖ in input space (linear with w) or feature space (√(αᵀQα)). */
export function weightNorm(solution: BinarySolution): number {
  if (solution.w) {
    let s = 0;
    for (let j = 0; j < solution.w.length; j++) s += solution.w[j] * solution.w[j];
    return Math.sqrt(s);
  }
  return Math.sqrt(Math.max(0, solution.wNormSquared));
}

/** Support vectors (α > 0) ordered by α descending, ties by index ascending. */
export function supportByInfluence(alpha: Float64Array): number[] {
  const sv: number[] = [];
  for (let i = 0; i < alpha.length; i++) if (alpha[i] > 0) sv.push(i);
  sv.sort((a, b) => alpha[b] - alpha[a] || a - b);
  return sv;
}

export interface PivotOptions {
  readonly threshold?: number;
  readonly cap?: number;
  readonly signal?: AbortSignal;
  /** called before each refit (step counts from 1) */
  readonly onStep?: (step: number, of: number) => void;
}

/**
 * @param refitWithout  fits the same problem with sample i excluded, warm-started from `warm`
 *                      (the full solution's α with αᵢ = 0).
 */
export function computePivots(
  full: BinarySolution,
  refitWithout: (i: number, warm: Float64Array) => BinarySolution,
  options: PivotOptions = {},
): PivotReport {
  const threshold = options.threshold ?? DEFAULT_PIVOT_THRESHOLD;
  const cap = options.cap ?? DEFAULT_PIVOT_CAP;
  const width = marginWidthOf(full);
  const order = supportByInfluence(full.alpha);
  const todo = order.slice(0, Math.max(0, cap));
  const computed: PivotEntry[] = [];
  for (let s = 0; s < todo.length; s++) {
    if (options.signal?.aborted) throw new FitCancelledError();
    options.onStep?.(s + 1, todo.length);
    const i = todo[s];
    const warm = Float64Array.from(full.alpha);
    warm[i] = 0;
    const sol = refitWithout(i, warm);
    const w2 = marginWidthOf(sol);
    const delta = w2 - width;
    const rel = delta / width;
    computed.push({
      index: i,
      alpha: full.alpha[i],
      marginWidthWithout: w2,
      deltaWidth: delta,
      relativeDelta: rel,
      isPivot: Math.abs(rel) > threshold,
      converged: sol.converged,
      iterations: sol.iterations,
    });
  }
  const pivots = computed.filter((e) => e.isPivot).map((e) => e.index).sort((a, b) => a - b);
  return { threshold, cap, supportCount: order.length, marginWidth: width, computed, skipped: order.slice(todo.length), pivots };
}
