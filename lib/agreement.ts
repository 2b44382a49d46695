/**
 * Inter-annotator agreement (pure; no database, no React).
 *
 *   cohensKappa(a, b)        Cohen's kappa (Cohen 1960) of two raters over the items both rated:
 *                            κ = (p_o − p_e) / (1 − p_e), p_o the observed share of items where the
 *                            two ratings are equal, p_e = Σ_c p_A(c)·p_B(c) the agreement expected
 *                            by chance from each rater's own marginal shares.
 *   percentAgreement(pairs)  share of pairs with equal ratings (p_o alone, no chance correction)
 *   pairedRatings(a, b)      the items both raters rated, as [ratingA, ratingB] pairs
 *   confusionMatrix(…)       counts of (original label, final label) over a class list
 *
 * Degenerate case: when p_e = 1 (both raters used one and the same category for every item) κ is
 * 0/0. We report κ = 1 when p_o = 1 (the raters agree perfectly) and null when there is nothing to
 * compare (no shared items). κ ranges over [−1, 1]; it is symmetric in the two raters.
 */

export interface KappaResult {
  /** Items both raters rated. */
  readonly n: number;
  /** Observed agreement p_o (null when n = 0). */
  readonly observed: number | null;
  /** Chance agreement p_e (null when n = 0). */
  readonly expected: number | null;
  /** Cohen's kappa (null when n = 0). */
  readonly kappa: number | null;
}

/** The items both raters rated (keys present in both maps), in a stable (sorted key) order. */
export function pairedRatings<C>(a: ReadonlyMap<string, C>, b: ReadonlyMap<string, C>): [C, C][] {
  const keys = [...a.keys()].filter((k) => b.has(k)).sort();
  return keys.map((k) => [a.get(k) as C, b.get(k) as C]);
}

/** Share of pairs whose two ratings are equal; null for no pairs. */
export function percentAgreement<C>(pairs: readonly (readonly [C, C])[]): number | null {
  if (pairs.length === 0) return null;
  let same = 0;
  for (const [x, y] of pairs) if (x === y) same++;
  return same / pairs.length;
}

/** Cohen's kappa of rating pairs [rater A, rater B] (categories compared with ===). */
export function kappaOfPairs<C>(pairs: readonly (readonly [C, C])[]): KappaResult {
  const n = pairs.length;
  if (n === 0) return { n: 0, observed: null, expected: null, kappa: null };
  const countA = new Map<C, number>();
  const countB = new Map<C, number>();
  let same = 0;
  for (const [x, y] of pairs) {
    if (x === y) same++;
    countA.set(x, (countA.get(x) ?? 0) + 1);
    countB.set(y, (countB.get(y) ?? 0) + 1);
  }
  const observed = same / n;
  let expected = 0;
  for (const [c, ca] of countA) expected += (ca / n) * ((countB.get(c) ?? 0) / n);
  // Rounding can push p_e a hair above p_o when both are 1; treat |1 − p_e| below 1e-12 as 1.
  if (1 - expected < 1e-12) return { n, observed, expected, kappa: observed === 1 ? 1 : 0 };
  const kappa = (observed - expected) / (1 - expected);
  return { n, observed, expected, kappa: Math.min(1, Math.max(-1, kappa)) };
}

/** Cohen's kappa of two raters over the items both rated (item id → category). */
export function cohensKappa<C>(a: ReadonlyMap<string, C>, b: ReadonlyMap<string, C>): KappaResult {
  return kappaOfPairs(pairedRatings(a, b));
}

/** Cohen's kappa from a square contingency table (rows rater A, columns rater B, same category order). */
export function kappaOfTable(table: readonly (readonly number[])[]): KappaResult {
  const k = table.length;
  const pairs: [number, number][] = [];
  for (let i = 0; i < k; i++) {
    if (table[i].length !== k) throw new Error('kappaOfTable needs a square table');
    for (let j = 0; j < k; j++) {
      const c = table[i][j];
      if (!Number.isInteger(c) || c < 0) throw new Error('table counts must be non-negative integers');
      for (let r = 0; r < c; r++) pairs.push([i, j]);
    }
  }
  return kappaOfPairs(pairs);
}

export interface Confusion {
  /** Row and column order. Labels outside `classes` are appended in first-seen order. */
  readonly classes: readonly string[];
  /** counts[i][j]: items with original label classes[i] and final label classes[j]. */
  readonly counts: readonly (readonly number[])[];
  readonly total: number;
  /** Items whose final label equals the original. */
  readonly unchanged: number;
}

/** Original-versus-final confusion matrix. */
export function confusionMatrix(items: readonly { readonly original: string; readonly final: string }[], classes: readonly string[]): Confusion {
  const order = [...classes];
  const index = new Map(order.map((c, i) => [c, i] as const));
  const at = (c: string): number => {
    let i = index.get(c);
    if (i === undefined) {
      i = order.length;
      order.push(c);
      index.set(c, i);
    }
    return i;
  };
  const pairs = items.map((it) => [at(it.original), at(it.final)] as const);
  const counts = order.map(() => order.map(() => 0));
  let unchanged = 0;
  for (const [i, j] of pairs) {
    counts[i][j]++;
    if (i === j) unchanged++;
  }
  return { classes: order, counts, total: items.length, unchanged };
}
