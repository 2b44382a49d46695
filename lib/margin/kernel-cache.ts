/**
 * Kernel-column cache for the C-SVM dual: columns of Q with Qᵢⱼ = yᵢyⱼK(xᵢ, xⱼ).
 *
 * Follows the design of LIBSVM's `Cache` and `SVC_Q` (Chang & Lin, "LIBSVM: a library for support
 * vector machines", ACM TIST 2011, §4 / §5.1): a least-recently-used list of columns under a memory
 * cap in bytes; a column is stored only for the first `len` (active) indices, and when a longer
 * prefix is asked for, only the missing tail is computed. Index swaps for shrinking exchange two
 * rows of the problem, keep cached columns consistent by swapping their two entries, and drop a
 * column that covers only one of the two positions.
 *
 * The cache owns a private row-major Float64Array copy of the training rows it was given, so that
 * swaps can move rows physically and every column is computed by one sequential pass.
 */
import { fillKernelRow, fillQColumn, rowSquaredNorms, validateKernel } from './kernel';
import type { DenseRows, KernelSpec } from './types';
import { EngineInputError } from './types';

export type QColumn = Float32Array | Float64Array;
export type CachePrecision = 'float32' | 'float64';

export interface KernelCacheOptions {
  readonly kernel: KernelSpec;
  /** Memory cap for cached column data in bytes; at least two full columns are always allowed. */
  readonly cacheBytes: number;
  /** Storage type of cached columns (LIBSVM stores float). */
  readonly precision: CachePrecision;
}

/** Statistics, for profiling and tests. */
export interface KernelCacheStats {
  /** Column requests answered without computing any kernel value. */
  hits: number;
  /** Column requests that had to compute at least part of the column. */
  misses: number;
  /** Kernel values computed. */
  kernelEvaluations: number;
}

/**
 * Q matrix restricted to a subset of the training rows (`rows`), with an LRU column cache.
 * Position p of this matrix is training row rows[p] until `swapIndex` permutes positions.
 */
export class KernelColumnCache {
  readonly l: number;
  /** Diagonal Qᵢᵢ = K(xᵢ, xᵢ) at each position (swapped along with the positions). */
  readonly QD: Float64Array;
  readonly stats: KernelCacheStats = { hits: 0, misses: 0, kernelEvaluations: 0 };

  private readonly spec: KernelSpec;
  private readonly d: number;
  private readonly x: Float64Array;
  private readonly sq: Float64Array | null;
  private readonly y: Int8Array;
  private readonly float32: boolean;
  /** Dot products of the column being computed. */
  private readonly scratch: Float64Array;
  private readonly columns: (QColumn | null)[];
  private readonly lens: Int32Array;
  /** Doubly linked circular LRU list over positions; node l is the list head. */
  private readonly prev: Int32Array;
  private readonly next: Int32Array;
  /** Remaining budget in column entries (counted by the capacity of stored arrays). */
  private size: number;
  private readonly bytesPer: number;

  constructor(X: DenseRows, y: Int8Array, rows: Int32Array, options: KernelCacheOptions) {
    validateKernel(options.kernel);
    const l = rows.length;
    const d = X.cols;
    if (y.length !== X.rows) throw new EngineInputError('kernel cache: y length differs from row count');
    this.l = l;
    this.d = d;
    this.spec = options.kernel;
    this.float32 = options.precision === 'float32';
    this.x = new Float64Array(l * d);
    this.y = new Int8Array(l);
    for (let p = 0; p < l; p++) {
      const r = rows[p];
      this.y[p] = y[r];
      for (let k = 0; k < d; k++) this.x[p * d + k] = X.data[r * d + k];
    }
    const packed: DenseRows = { data: this.x, rows: l, cols: d };
    this.sq = options.kernel.type === 'rbf' ? rowSquaredNorms(packed) : null;
    this.QD = new Float64Array(l);
    this.scratch = new Float64Array(l);
    for (let p = 0; p < l; p++) {
      fillKernelRow(this.spec, this.x, p, this.x, d, p, p + 1, this.QD, this.sq, this.sq, this.scratch);
    }
    this.columns = new Array<QColumn | null>(l).fill(null);
    this.lens = new Int32Array(l);
    this.prev = new Int32Array(l + 1).fill(l);
    this.next = new Int32Array(l + 1).fill(l);
    this.bytesPer = this.float32 ? 4 : 8;
    // At least 3 full columns: a column just returned is never evicted by the next request (see getQ).
    this.size = Math.max(Math.floor(options.cacheBytes / this.bytesPer), 3 * l);
  }

  /** Entries currently cached (for tests). */
  cachedEntries(): number {
    let total = 0;
    for (let h = this.next[this.l]; h !== this.l; h = this.next[h]) total += this.lens[h];
    return total;
  }

  /** Bytes held by cached columns (capacity of their arrays). */
  cachedBytes(): number {
    let total = 0;
    for (let h = this.next[this.l]; h !== this.l; h = this.next[h]) total += (this.columns[h] as QColumn).length;
    return total * this.bytesPer;
  }

  private lruDelete(h: number): void {
    this.next[this.prev[h]] = this.next[h];
    this.prev[this.next[h]] = this.prev[h];
  }

  private lruInsert(h: number): void {
    const head = this.l;
    this.next[h] = head;
    this.prev[h] = this.prev[head];
    this.next[this.prev[h]] = h;
    this.prev[head] = h;
  }

  /** Drop the least recently used column; returns its array (null if nothing is cached). */
  private evictOne(): QColumn | null {
    const old = this.next[this.l];
    if (old === this.l) return null;
    const col = this.columns[old] as QColumn;
    this.lruDelete(old);
    this.size += col.length;
    this.columns[old] = null;
    this.lens[old] = 0;
    return col;
  }

  /**
   * Storage for a column of `len` entries: an evicted array of capacity len … 1.25·len is reused,
   * otherwise a new one is allocated (so the cap holds without waiting for garbage collection).
   */
  private takeStorage(len: number): QColumn {
    let reuse: QColumn | null = null;
    while (this.size < len) {
      const ev = this.evictOne();
      if (ev === null) break;
      if (reuse === null && ev.length >= len && ev.length - len <= len >> 2) reuse = ev;
    }
    if (reuse !== null) {
      while (this.size < reuse.length && this.evictOne() !== null);
      this.size -= reuse.length;
      return reuse;
    }
    this.size -= len;
    return this.float32 ? new Float32Array(len) : new Float64Array(len);
  }

  /**
   * Column i of Q for positions [0, len). The returned array may be longer than len; only the
   * first len entries are meaningful. Its storage is recycled once the column is evicted; because the
   * budget holds at least three full columns and the column becomes most recently used, it stays valid
   * through the next getQ call (LIBSVM relies on the same: Q_i survives fetching Q_j).
   */
  getQ(i: number, len: number): QColumn {
    const have = this.lens[i];
    const col = this.columns[i];
    if (have > 0) this.lruDelete(i);
    if (col !== null && have >= len) {
      this.stats.hits++;
      this.lruInsert(i);
      return col;
    }
    this.stats.misses++;
    let store: QColumn;
    if (col !== null && col.length >= len) {
      store = col; // capacity suffices: fill the tail in place
    } else {
      if (col !== null) this.size += col.length; // old storage is released after copying its prefix
      store = this.takeStorage(len);
      if (col !== null && have > 0) store.set(col.subarray(0, have));
    }
    this.computeColumn(i, have, len, store);
    this.columns[i] = store;
    this.lens[i] = len;
    this.lruInsert(i);
    return store;
  }

  /** out[j] = Qᵢⱼ for j in [from, to). */
  computeColumn(i: number, from: number, to: number, out: QColumn): void {
    fillQColumn(this.spec, this.x, this.d, i, from, to, out, this.sq, this.y, this.scratch);
    this.stats.kernelEvaluations += to - from;
  }

  /** Exchange positions i and j (rows, labels, diagonal and cached entries). */
  swapIndex(i: number, j: number): void {
    this.swapIndices(Int32Array.of(i, j), 1);
  }

  /**
   * Apply `count` position swaps (pairs[2t], pairs[2t + 1]) in order. Equivalent to calling LIBSVM's
   * swap_index for each pair, but the entries of each cached column are permuted in one pass over the
   * whole list, which keeps that column in the processor cache while it is being permuted.
   */
  swapIndices(pairs: Int32Array, count: number): void {
    for (let t = 0; t < count; t++) {
      const i = pairs[2 * t];
      const j = pairs[2 * t + 1];
      if (i !== j) this.swapHeaders(i, j);
    }
    const head = this.l;
    for (let h = this.next[head]; h !== head; ) {
      const nextH = this.next[h];
      this.permuteColumn(h, pairs, count);
      h = nextH;
    }
  }

  private swapHeaders(i: number, j: number): void {
    this.swapData(i, j);
    const { columns, lens } = this;
    if (lens[i] > 0) this.lruDelete(i);
    if (lens[j] > 0) this.lruDelete(j);
    const tc = columns[i];
    columns[i] = columns[j];
    columns[j] = tc;
    const tl = lens[i];
    lens[i] = lens[j];
    lens[j] = tl;
    if (lens[i] > 0) this.lruInsert(i);
    if (lens[j] > 0) this.lruInsert(j);
  }

  /** Swap the entries of cached column h for each pair; drop it if it covers only one side of a pair. */
  private permuteColumn(h: number, pairs: Int32Array, count: number): void {
    const len = this.lens[h];
    const col = this.columns[h] as QColumn;
    for (let t = 0; t < count; t++) {
      const a = pairs[2 * t];
      const b = pairs[2 * t + 1];
      const lo = a < b ? a : b;
      const hi = a < b ? b : a;
      if (len <= lo || lo === hi) continue;
      if (len > hi) {
        const v = col[lo];
        col[lo] = col[hi];
        col[hi] = v;
      } else {
        this.lruDelete(h);
        this.size += col.length;
        this.columns[h] = null;
        this.lens[h] = 0;
        return;
      }
    }
  }

  private swapData(i: number, j: number): void {
    const { x, d, y, QD, sq } = this;
    const io = i * d;
    const jo = j * d;
    for (let k = 0; k < d; k++) {
      const t = x[io + k];
      x[io + k] = x[jo + k];
      x[jo + k] = t;
    }
    const ty = y[i];
    y[i] = y[j];
    y[j] = ty;
    const tq = QD[i];
    QD[i] = QD[j];
    QD[j] = tq;
    if (sq) {
      const ts = sq[i];
      sq[i] = sq[j];
      sq[j] = ts;
    }
  }
}
