/**
 * Standings: how every sample sits against one binary boundary f(x) = Σ αⱼyⱼK(xⱼ, x) + b.
 *
 *   decision   f(x)
 *   margin     y·f(x)              (functional margin; 1 on the margin, 0 on the hyperplane)
 *   distance   f(x)/‖w‖            (signed geometric distance; kernel: in feature space, ‖w‖² = αᵀQα)
 *   slack      max(0, 1 − y·f(x))  (hinge loss)
 *   alpha      αᵢ, support kind: 'none' (α = 0), 'free' (0 < α < Cᵢ), 'bound' (α = Cᵢ)
 *
 * Flags (DESIGN.md §2):
 *   wrong-side     y·f(x) < 0
 *   inside-margin  0 ≤ y·f(x) < 1 − marginTolerance. The tolerance (default 1e-3, the accuracy to
 *                  which solutions are checked against LIBSVM) keeps samples that sit on the margin
 *                  up to solver accuracy — every free support vector, in theory exactly at y·f = 1 —
 *                  from being flagged.
 *   near-boundary  |distance| ≤ nearBand · (1/‖w‖), i.e. within `nearBand` margin half-widths of the
 *                  hyperplane, equivalently |f(x)| ≤ nearBand. Expressing the band in units of the
 *                  margin half-width keeps it comparable across fits, scalings and C.
 *   pivot          a support vector whose removal changes the margin width by more than the pivot
 *                  threshold (computed in pivots.ts and passed in here).
 * Columns are typed arrays (one entry per sample) so that 100k-sample standings stay compact and
 * structured-clone-able.
 */

export const FLAG_WRONG_SIDE = 1;
export const FLAG_INSIDE_MARGIN = 2;
export const FLAG_NEAR_BOUNDARY = 4;
export const FLAG_PIVOT = 8;

export type FlagName = 'wrong-side' | 'inside-margin' | 'near-boundary' | 'pivot';
export type SupportKind = 'none' | 'free' | 'bound';

const FLAG_ORDER: readonly [number, FlagName][] = [
  [FLAG_WRONG_SIDE, 'wrong-side'],
  [FLAG_INSIDE_MARGIN, 'inside-margin'],
  [FLAG_NEAR_BOUNDARY, 'near-boundary'],
  [FLAG_PIVOT, 'pivot'],
];

/** Flag names of a bit mask, in the fixed order wrong-side, inside-margin, near-boundary, pivot. */
export function flagNames(mask: number): FlagName[] {
  const out: FlagName[] = [];
  for (const [bit, name] of FLAG_ORDER) if (mask & bit) out.push(name);
  return out;
}

export const SUPPORT_NONE = 0;
export const SUPPORT_FREE = 1;
export const SUPPORT_BOUND = 2;
const SUPPORT_NAMES: readonly SupportKind[] = ['none', 'free', 'bound'];

export function supportKindName(code: number): SupportKind {
  return SUPPORT_NAMES[code] ?? 'none';
}

export interface BoundaryStandings {
  readonly decision: Float64Array;
  readonly margin: Float64Array;
  readonly distance: Float64Array;
  readonly slack: Float64Array;
  readonly alpha: Float64Array;
  /** SUPPORT_NONE | SUPPORT_FREE | SUPPORT_BOUND per sample */
  readonly support: Uint8Array;
  /** bit mask of FLAG_* per sample */
  readonly flags: Uint8Array;
}

export interface StandingsInput {
  /** labels ±1 */
  readonly y: Int8Array;
  /** f(xᵢ) */
  readonly decision: Float64Array;
  readonly alpha: Float64Array;
  /** per-sample upper bounds Cᵢ (Infinity for hard margin / squared hinge: never at bound) */
  readonly upperBound: Float64Array;
  /** ‖w‖ (kernel: √(αᵀQα)) */
  readonly wNorm: number;
}

export interface StandingsOptions {
  /** near-boundary band in margin half-widths (default 0.5) */
  readonly nearBand?: number;
  /** inside-margin tolerance on y·f (default 1e-3) */
  readonly marginTolerance?: number;
  /** samples flagged as pivots (indices) */
  readonly pivots?: Iterable<number>;
  /**
   * Only the wrong-side flag is meaningful (a hyperplane that is not a max-margin solution, e.g. the
   * best hyperplane of a failed hard-margin verdict): skip inside-margin and near-boundary.
   */
  readonly wrongSideOnly?: boolean;
}

export const DEFAULT_NEAR_BAND = 0.5;
export const DEFAULT_MARGIN_TOLERANCE = 1e-3;

export function computeStandings(input: StandingsInput, options: StandingsOptions = {}): BoundaryStandings {
  const { y, decision, alpha, upperBound, wNorm } = input;
  const n = y.length;
  const nearBand = options.nearBand ?? DEFAULT_NEAR_BAND;
  const tol = options.marginTolerance ?? DEFAULT_MARGIN_TOLERANCE;
  const margin = new Float64Array(n);
  const distance = new Float64Array(n);
  const slack = new Float64Array(n);
  const alphaOut = new Float64Array(n);
  const support = new Uint8Array(n);
  const flags = new Uint8Array(n);
  const decisionOut = Float64Array.from(decision);
  for (let i = 0; i < n; i++) {
    const f = decision[i];
    const m = y[i] * f;
    margin[i] = m;
    distance[i] = wNorm > 0 ? f / wNorm : f === 0 ? 0 : Math.sign(f) * Infinity;
    slack[i] = m < 1 ? 1 - m : 0;
    const a = alpha[i];
    alphaOut[i] = a;
    if (a > 0) {
      const c = upperBound[i];
      support[i] = Number.isFinite(c) && a >= c * (1 - 1e-12) ? SUPPORT_BOUND : SUPPORT_FREE;
    }
    let fl = 0;
    if (m < 0) fl |= FLAG_WRONG_SIDE;
    if (!options.wrongSideOnly) {
      if (m >= 0 && m < 1 - tol) fl |= FLAG_INSIDE_MARGIN;
      if (Math.abs(f) <= nearBand) fl |= FLAG_NEAR_BOUNDARY;
    }
    flags[i] = fl;
  }
  if (options.pivots) for (const i of options.pivots) flags[i] |= FLAG_PIVOT;
  return { decision: decisionOut, margin, distance, slack, alpha: alphaOut, support, flags };
}

export interface StandingCounts {
  readonly samples: number;
  readonly support: number;
  readonly free: number;
  readonly bound: number;
  readonly wrongSide: number;
  readonly insideMargin: number;
  readonly nearBoundary: number;
  readonly pivot: number;
}

export function countStandings(s: BoundaryStandings): StandingCounts {
  let free = 0;
  let bound = 0;
  let wrongSide = 0;
  let insideMargin = 0;
  let nearBoundary = 0;
  let pivot = 0;
  for (let i = 0; i < s.flags.length; i++) {
    if (s.support[i] === SUPPORT_FREE) free++;
    else if (s.support[i] === SUPPORT_BOUND) bound++;
    const f = s.flags[i];
    if (f & FLAG_WRONG_SIDE) wrongSide++;
    if (f & FLAG_INSIDE_MARGIN) insideMargin++;
    if (f & FLAG_NEAR_BOUNDARY) nearBoundary++;
    if (f & FLAG_PIVOT) pivot++;
  }
  return { samples: s.flags.length, support: free + bound, free, bound, wrongSide, insideMargin, nearBoundary, pivot };
}

/** One sample's standing as a plain object (for display and JSON). */
export interface SampleStanding {
  readonly decision: number;
  readonly margin: number;
  readonly distance: number;
  readonly slack: number;
  readonly alpha: number;
  readonly support: SupportKind;
  readonly flags: FlagName[];
}

export function standingAt(s: BoundaryStandings, i: number): SampleStanding {
  return {
    decision: s.decision[i],
    margin: s.margin[i],
    distance: s.distance[i],
    slack: s.slack[i],
    alpha: s.alpha[i],
    support: supportKindName(s.support[i]),
    flags: flagNames(s.flags[i]),
  };
}
