/**
 * Stratified, seeded k-fold splits for out-of-fold margins and model selection.
 */
import { stratifiedFoldAssignment, compareStrings } from './random';
import { EngineInputError } from './types';

export interface Fold {
  /** Row indices used to fit (ascending). */
  readonly train: Int32Array;
  /** Held-out row indices (ascending). */
  readonly test: Int32Array;
}

export interface Folds {
  readonly k: number;
  readonly seed: number;
  /** fold index of every sample */
  readonly assignment: Int32Array;
  readonly folds: readonly Fold[];
}

/**
 * Splits samples into k stratified folds. Every class needs at least 2 members, so that each
 * training part still contains every class (otherwise the held-out member of a singleton class
 * could not be scored against its own class).
 */
export function stratifiedKFold(labels: ArrayLike<string | number>, k: number, seed: number): Folds {
  const counts = new Map<string, number>();
  for (let i = 0; i < labels.length; i++) {
    const key = String(labels[i]);
    counts.set(key, (counts.get(key) ?? 0) + 1);
  }
  const small = [...counts.entries()].filter(([, c]) => c < 2).map(([key]) => key).sort(compareStrings);
  if (small.length > 0) {
    throw new EngineInputError(
      `cross-validation needs at least 2 samples in every class; class ${small.map((s) => `"${s}"`).join(', ')} has 1`,
    );
  }
  const assignment = stratifiedFoldAssignment(labels, k, seed);
  const sizes = new Int32Array(k);
  for (let i = 0; i < assignment.length; i++) sizes[assignment[i]]++;
  const folds: Fold[] = [];
  for (let f = 0; f < k; f++) {
    const test = new Int32Array(sizes[f]);
    const train = new Int32Array(assignment.length - sizes[f]);
    let a = 0;
    let b = 0;
    for (let i = 0; i < assignment.length; i++) {
      if (assignment[i] === f) test[a++] = i;
      else train[b++] = i;
    }
    folds.push({ train, test });
  }
  return { k, seed, assignment, folds };
}
