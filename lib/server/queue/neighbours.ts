/**
 * Nearest neighbours of a sample in feature space, on the features as the fit sees them:
 * z-scored (project scaling `standard`, column means and population standard deviations of the
 * project's samples; zero-variance columns ignored), L2-normalised rows (`l2`, so the distance is
 * √(2 − 2·cos)), or raw (`none`). Brute force over the cached matrix: one pass of n·d
 * multiply-adds (≈ 25 M for 100k × 256), no index to keep up to date.
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

/** Keeps the k smallest (distance, row) pairs seen, in order. */
class Best {
  readonly list: Neighbour[] = [];
  constructor(private readonly k: number) {}
  consider(i: number, dist: number): void {
    const best = this.list;
    const k = this.k;
    if (best.length === k && dist >= best[k - 1].distance) return;
    let pos = best.length;
    while (pos > 0 && (best[pos - 1].distance > dist || (best[pos - 1].distance === dist && best[pos - 1].row > i))) pos--;
    best.splice(pos, 0, { row: i, distance: dist });
    if (best.length > k) best.pop();
  }
}

/**
 * `nearestNeighbours` for several rows in ONE pass over the matrix: the search is bound by reading
 * the n·d matrix from memory, not by the arithmetic, so each row of the matrix is compared with
 * every query while it is in cache. Same arithmetic per pair as one query at a time, so the same
 * answers.
 */
export function nearestNeighboursOfRows(m: MatrixView, scaling: Scaling, rows: readonly number[], k = 5): Neighbour[][] {
  const { X, rows: n, cols: d } = m;
  const p = prepare(m, scaling);
  const best = rows.map(() => new Best(k));
  const Q = rows.length;
  if (p.scaling === 'l2' && p.weights) {
    const w = p.weights;
    for (let i = 0; i < n; i++) {
      const o = i * d;
      for (let t = 0; t < Q; t++) {
        const row = rows[t];
        if (i === row) continue;
        const q = row * d;
        let dot = 0;
        for (let j = 0; j < d; j++) dot += X[o + j] * X[q + j];
        const wq = w[row];
        const cos = dot * w[i] * wq;
        best[t].consider(i, Math.sqrt(Math.max(0, (w[i] > 0 ? 1 : 0) + (wq > 0 ? 1 : 0) - 2 * cos)));
      }
    }
  } else if (p.scaling === 'standard' && p.weights) {
    const w = p.weights;
    for (let i = 0; i < n; i++) {
      const o = i * d;
      for (let t = 0; t < Q; t++) {
        const row = rows[t];
        if (i === row) continue;
        const q = row * d;
        let s = 0;
        for (let j = 0; j < d; j++) {
          const v = (X[o + j] - X[q + j]) * w[j];
          s += v * v;
        }
        best[t].consider(i, Math.sqrt(s));
      }
    }
  } else {
    for (let i = 0; i < n; i++) {
      const o = i * d;
      for (let t = 0; t < Q; t++) {
        const row = rows[t];
        if (i === row) continue;
        const q = row * d;
        let s = 0;
        for (let j = 0; j < d; j++) {
          const v = X[o + j] - X[q + j];
          s += v * v;
        }
        best[t].consider(i, Math.sqrt(s));
      }
    }
  }
  return best.map((b) => b.list);
}
