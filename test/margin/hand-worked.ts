import type { LabelledData } from '@/lib/margin/model';

/**
 * Hand-worked 2-D example (ours). Negatives A = (0, 0), B = (−1, 0); positives C = (2, 0), D = (3, 1).
 * The hard-margin width equals the distance between the convex hulls of the classes: the hull of the
 * negatives is the segment AB, that of the positives the segment CD. The point of CD nearest to A is C
 * (projection parameter ((A − C)·(D − C))/‖D − C‖² = ((−2, 0)·(1, 1))/2 = −1, clamped to 0) and the
 * point of AB nearest to C is A, so the hulls are 2 apart along the x₁ axis: margin width 2/‖w‖ = 2,
 * w = 2(C − A)/‖C − A‖² = (1, 0), and the hyperplane bisects AC: x₁ = 1, b = −1.
 *   f(A) = −1, f(B) = −2, f(C) = 1, f(D) = 3 − 1 = 2.
 * Support vectors A and C: w = α_C·C − α_A·A = α_C·(2, 0) ⇒ α_C = ½, and Σαᵢyᵢ = 0 ⇒ α_A = ½.
 * Dual objective Σα − ½‖w‖² = 1 − ½ = ½ = primal ½‖w‖² (no slack).
 */
export const fourPoints: LabelledData = {
  ids: ['A', 'B', 'C', 'D'],
  labels: ['neg', 'neg', 'pos', 'pos'],
  X: { data: Float64Array.from([0, 0, -1, 0, 2, 0, 3, 1]), rows: 4, cols: 2 },
};

