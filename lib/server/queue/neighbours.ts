/**
 * Nearest neighbours of a sample in feature space, on the features as the fit sees them:
 * z-scored (project scaling `standard`, column means and population standard deviations of the
 * project's samples; zero-variance columns ignored), L2-normalised rows (`l2`, so the distance is
 * √(2 − 2·cos)), or raw (`none`). Exact brute force over the cached matrix — one pass of at
 * most n·d multiply-adds (≈ 25 M for 100k × 256), no index to keep up to date — with partial
 * distance search (a row is dropped as soon as its running sum of squares reaches the k-th best so
 * far; Bei & Gray, "An improvement of the minimum distortion encoding algorithm for vector
 * quantization", IEEE Trans. Communications 33(10), 1985).
 */
import type { FeatureMatrix } from '../fits/data';

/** The part of a feature matrix the search reads (what crosses into the neighbour worker). */
export type MatrixView = Pick<FeatureMatrix, 'projectId' | 'fingerprint' | 'X' | 'rows' | 'cols'>;

export type Scaling = 'standard' | 'l2' | 'none';

interface Prepared {
  readonly fingerprint: string;
  readonly scaling: Scaling;
  /** standard: 1/sd per column (0 for constant columns); l2: 1/‖row‖ per row */
  readonly weights: Float64Array | null;
  readonly mean: Float64Array | null;
}

const store = globalThis as typeof globalThis & { __borderlineNeighbourPrep?: Map<string, Prepared> };
const prepStore = (): Map<string, Prepared> => (store.__borderlineNeighbourPrep ??= new Map());

function prepare(m: MatrixView, scaling: Scaling): Prepared {
  const key = `${m.projectId}:${scaling}`;
  const hit = prepStore().get(key);
  if (hit && hit.fingerprint === m.fingerprint) return hit;
  const { X, rows: n, cols: d } = m;
  let prepared: Prepared;
  if (scaling === 'standard') {
    const mean = new Float64Array(d);
    const sq = new Float64Array(d);
    for (let i = 0; i < n; i++) for (let j = 0; j < d; j++) mean[j] += X[i * d + j];
    for (let j = 0; j < d; j++) mean[j] /= Math.max(1, n);
    for (let i = 0; i < n; i++)
      for (let j = 0; j < d; j++) {
        const v = X[i * d + j] - mean[j];
        sq[j] += v * v;
      }
    const inv = new Float64Array(d);
    for (let j = 0; j < d; j++) {
      const sd = Math.sqrt(sq[j] / Math.max(1, n));
      inv[j] = sd > 0 ? 1 / sd : 0;
    }
    prepared = { fingerprint: m.fingerprint, scaling, weights: inv, mean };
  } else if (scaling === 'l2') {
    const inv = new Float64Array(n);
    for (let i = 0; i < n; i++) {
      let s = 0;
      for (let j = 0; j < d; j++) s += X[i * d + j] * X[i * d + j];
      inv[i] = s > 0 ? 1 / Math.sqrt(s) : 0;
    }
    prepared = { fingerprint: m.fingerprint, scaling, weights: inv, mean: null };
  } else {
    prepared = { fingerprint: m.fingerprint, scaling, weights: null, mean: null };
  }
  prepStore().set(key, prepared);
  return prepared;
}

export interface Neighbour {
  readonly row: number;
  readonly distance: number;
}

/** The k nearest rows to `row` (itself excluded), nearest first; ties by row index. */
export function nearestNeighbours(m: MatrixView, scaling: Scaling, row: number, k = 5): Neighbour[] {
  return nearestNeighboursOfRows(m, scaling, [row], k)[0];
}

/**
 * The k smallest squared distances seen for one query, in order (ties: the row seen first, i.e. the
 * lower row index, since rows are visited in order). `limit` is the k-th smallest so far (∞ until k
 * are known): a candidate whose partial sum reaches it cannot enter.
 */
class Best {
  readonly rows: Int32Array;
  readonly squared: Float64Array;
  size = 0;
  limit = Infinity;
  constructor(private readonly k: number) {
    this.rows = new Int32Array(k);
    this.squared = new Float64Array(k);
  }
  consider(i: number, sq: number): void {
    if (sq >= this.limit) return;
    const { rows, squared, k } = this;
    let pos = Math.min(this.size, k - 1);
    while (pos > 0 && squared[pos - 1] > sq) {
      squared[pos] = squared[pos - 1];
      rows[pos] = rows[pos - 1];
      pos--;
    }
    squared[pos] = sq;
    rows[pos] = i;
    if (this.size < k) this.size++;
    if (this.size === k) this.limit = squared[k - 1];
  }
  list(): Neighbour[] {
    const out: Neighbour[] = [];
    for (let p = 0; p < this.size; p++) out.push({ row: this.rows[p], distance: Math.sqrt(Math.max(0, this.squared[p])) });
    return out;
  }
}

/** How often (in columns, a multiple of 4) a partial sum is compared with the k-th best. */
const CHECK_EVERY = 32;

/**
 * Squared distance between matrix rows `o` and `q` (offsets), Σ_j ((X[o+j]·a − X[q+j]·b)·w_j)²
 * (standard: a = b = 1, w = 1/sd; l2: a, b = 1/‖row‖, w = 1; none: all 1); four partial sums,
 * stopped early once they reach `limit`: every term is non-negative, so a partial sum at or above
 * the k-th best distance means the row cannot enter the list (partial distance search). The value
 * returned is then only a lower bound, and ≥ limit. (One loop serves the three scalings: the
 * multiplications by 1 cost nothing measurable next to the memory reads.)
 */
function squaredDistance(X: Float32Array, o: number, q: number, d: number, a: number, b: number, w: Float64Array, limit: number): number {
  let s0 = 0;
  let s1 = 0;
  let s2 = 0;
  let s3 = 0;
  const d4 = d - (d % 4);
  let j = 0;
  for (; j < d4; j += 4) {
    const v0 = (X[o + j] * a - X[q + j] * b) * w[j];
    const v1 = (X[o + j + 1] * a - X[q + j + 1] * b) * w[j + 1];
    const v2 = (X[o + j + 2] * a - X[q + j + 2] * b) * w[j + 2];
    const v3 = (X[o + j + 3] * a - X[q + j + 3] * b) * w[j + 3];
    s0 += v0 * v0;
    s1 += v1 * v1;
    s2 += v2 * v2;
    s3 += v3 * v3;
    if ((j + 4) % CHECK_EVERY === 0 && s0 + s1 + (s2 + s3) >= limit) return s0 + s1 + (s2 + s3);
  }
  for (; j < d; j++) {
    const v = (X[o + j] * a - X[q + j] * b) * w[j];
    s0 += v * v;
  }
  return s0 + s1 + (s2 + s3);
}

/**
 * `nearestNeighbours` for several rows in ONE pass over the matrix, each row of the matrix compared
 * with every query while it is in cache. Distances: standard √Σ((x_j − q_j)/sd_j)²; l2
 * ‖x/‖x‖ − q/‖q‖‖ (= √(2 − 2·cos); a zero row counts as the origin); none ‖x − q‖. Exact: the
 * early stop of `squaredDistance` only skips rows that cannot enter the k best (about a third of
 * the arithmetic remains on 256-column embeddings). Distances are summed in double precision.
 */
export function nearestNeighboursOfRows(m: MatrixView, scaling: Scaling, rows: readonly number[], k = 5): Neighbour[][] {
  if (k <= 0) return rows.map(() => []);
  const { X, rows: n, cols: d } = m;
  const p = prepare(m, scaling);
  const best = rows.map(() => new Best(k));
  const Q = rows.length;
  const perRow = p.scaling === 'l2' ? p.weights : null;
  const perColumn = p.scaling === 'standard' && p.weights ? p.weights : new Float64Array(d).fill(1);
  for (let i = 0; i < n; i++) {
    const o = i * d;
    const a = perRow ? perRow[i] : 1;
    for (let t = 0; t < Q; t++) {
      const row = rows[t];
      if (i === row) continue;
      const b = best[t];
      b.consider(i, squaredDistance(X, o, row * d, d, a, perRow ? perRow[row] : 1, perColumn, b.limit));
    }
  }
  return best.map((b) => b.list());
}
