/**
 * Kernels on dense row-major data (lib/margin/types.ts `DenseRows`).
 *
 *   linear      K(x, x′) = x·x′
 *   RBF         K(x, x′) = exp(−γ‖x − x′‖²)
 *   polynomial  K(x, x′) = (γ x·x′ + coef0)^degree
 *
 * Single values (`kernelValue`) are for the edges; the solver fills whole kernel rows with
 * `fillKernelRow`, whose loops are specialised per kernel type and work on the raw typed arrays.
 * For RBF the squared norms ‖xᵢ‖² are precomputed once (`rowSquaredNorms`) so that
 * ‖x − x′‖² = ‖x‖² + ‖x′‖² − 2 x·x′ costs one dot product, as in LIBSVM (Chang & Lin 2011).
 */
import type { BinaryProblem, BinarySolution, DenseRows, KernelSpec } from './types';
import { EngineInputError } from './types';

type Floats = Float64Array | Float32Array;

/** ‖xᵢ‖² for every row of X. */
export function rowSquaredNorms(X: DenseRows): Float64Array {
  const { data, rows, cols } = X;
  const out = new Float64Array(rows);
  for (let i = 0; i < rows; i++) {
    const o = i * cols;
    let s = 0;
    for (let k = 0; k < cols; k++) {
      const v = data[o + k];
      s += v * v;
    }
    out[i] = s;
  }
  return out;
}

/** Throws EngineInputError unless the kernel parameters are usable. */
export function validateKernel(spec: KernelSpec): void {
  if (spec.type === 'linear') return;
  if (!(Number.isFinite(spec.gamma) && spec.gamma > 0)) {
    throw new EngineInputError(`kernel gamma must be a positive finite number, got ${spec.gamma}`);
  }
  if (spec.type === 'poly') {
    if (!Number.isFinite(spec.degree) || spec.degree <= 0) {
      throw new EngineInputError(`polynomial degree must be positive, got ${spec.degree}`);
    }
    if (!Number.isFinite(spec.coef0)) throw new EngineInputError(`polynomial coef0 must be finite, got ${spec.coef0}`);
  }
}

function dotRows(a: Floats, ao: number, b: Floats, bo: number, d: number): number {
  let s = 0;
  for (let k = 0; k < d; k++) s += a[ao + k] * b[bo + k];
  return s;
}

/**
 * K(Xᵢ, Zⱼ). With squared norms given, RBF uses ‖x‖² + ‖z‖² − 2x·z (clamped at 0, as the solver does);
 * without them it sums the squared differences directly.
 */
export function kernelValue(
  spec: KernelSpec,
  X: DenseRows,
  i: number,
  Z: DenseRows,
  j: number,
  sqNormX?: Float64Array,
  sqNormZ?: Float64Array,
): number {
  const d = X.cols;
  if (Z.cols !== d) throw new EngineInputError(`kernel: column counts differ (${d} vs ${Z.cols})`);
  const xo = i * d;
  const zo = j * d;
  switch (spec.type) {
    case 'linear':
      return dotRows(X.data, xo, Z.data, zo, d);
    case 'poly':
      return Math.pow(spec.gamma * dotRows(X.data, xo, Z.data, zo, d) + spec.coef0, spec.degree);
    case 'rbf': {
      let dist2: number;
      if (sqNormX && sqNormZ) {
        dist2 = sqNormX[i] + sqNormZ[j] - 2 * dotRows(X.data, xo, Z.data, zo, d);
        if (dist2 < 0) dist2 = 0;
      } else {
        dist2 = 0;
        for (let k = 0; k < d; k++) {
          const t = X.data[xo + k] - Z.data[zo + k];
          dist2 += t * t;
        }
      }
      return Math.exp(-spec.gamma * dist2);
    }
  }
}

/** Four dot products A_i·B_j, j = j0 … j0+3, into out (helper of dotProducts). */
function dot4(A: Floats, ao: number, B: Floats, d: number, j0: number, out: Float64Array): void {
  const b0 = j0 * d;
  const b1 = b0 + d;
  const b2 = b1 + d;
  const b3 = b2 + d;
  let s0 = 0;
  let s1 = 0;
  let s2 = 0;
  let s3 = 0;
  for (let k = 0; k < d; k++) {
    const a = A[ao + k];
    s0 += a * B[b0 + k];
    s1 += a * B[b1 + k];
    s2 += a * B[b2 + k];
    s3 += a * B[b3 + k];
  }
  out[j0] = s0;
  out[j0 + 1] = s1;
  out[j0 + 2] = s2;
  out[j0 + 3] = s3;
}

/**
 * out[j] = A_i·B_j for j in [from, to), where A_i starts at offset ao of A. Eight rows of B are
 * processed per pass so that each A_i[k] is loaded once for eight products (the loop is bound by
 * memory traffic and load count, not by arithmetic).
 */
export function dotProducts(A: Floats, ao: number, B: Floats, d: number, from: number, to: number, out: Float64Array): void {
  let j = from;
  for (; j + 7 < to; j += 8) {
    const b0 = j * d;
    const b1 = b0 + d;
    const b2 = b1 + d;
    const b3 = b2 + d;
    const b4 = b3 + d;
    const b5 = b4 + d;
    const b6 = b5 + d;
    const b7 = b6 + d;
    let s0 = 0;
    let s1 = 0;
    let s2 = 0;
    let s3 = 0;
    let s4 = 0;
    let s5 = 0;
    let s6 = 0;
    let s7 = 0;
    for (let k = 0; k < d; k++) {
      const a = A[ao + k];
      s0 += a * B[b0 + k];
      s1 += a * B[b1 + k];
      s2 += a * B[b2 + k];
      s3 += a * B[b3 + k];
      s4 += a * B[b4 + k];
      s5 += a * B[b5 + k];
      s6 += a * B[b6 + k];
      s7 += a * B[b7 + k];
    }
    out[j] = s0;
    out[j + 1] = s1;
    out[j + 2] = s2;
    out[j + 3] = s3;
    out[j + 4] = s4;
    out[j + 5] = s5;
    out[j + 6] = s6;
    out[j + 7] = s7;
  }
  if (j + 3 < to) {
    dot4(A, ao, B, d, j, out);
    j += 4;
  }
  for (; j < to; j++) {
    const bo = j * d;
    let s = 0;
    for (let k = 0; k < d; k++) s += A[ao + k] * B[bo + k];
    out[j] = s;
  }
}

// exp(x) for x ≤ 0 by table-driven range reduction (Tang, ACM TOMS 15(2), 1989): x = (n/64)·ln 2 + r,
// |r| ≤ ln 2 / 128, exp(x) = 2^(−q) · 2^(m/64) · p(r) with a degree-6 Taylor polynomial p. The
// Cody–Waite split of ln 2 (fdlibm's ln2_hi / ln2_lo) keeps r accurate. Measured against Math.exp:
// relative difference ≤ 4e-16 on [−708, 0] (test/margin/kernel.test.ts). Constant tables only.
const EXP_TABLE = Float64Array.from({ length: 64 }, (_, m) => Math.pow(2, m / 64));
const POW2_NEG = Float64Array.from({ length: 1024 }, (_, q) => Math.pow(2, -q));
const INV_LN2_64 = 64 / Math.LN2;
const LN2_64_HI = 6.9314718036912381649e-1 / 64;
const LN2_64_LO = 1.90821492927058770002e-10 / 64;
/** 1.5·2⁵²: (t + ROUNDER) − ROUNDER rounds t to the nearest integer for |t| < 2⁵¹ (cheaper than Math.round). */
const ROUNDER = 6755399441055744;

/** exp(x) for x ≤ 0 (falls back to Math.exp below −708, where results are subnormal or 0). */
export function expNonPositive(x: number): number {
  if (!(x >= -708)) return Math.exp(x);
  const nf = x * INV_LN2_64 + ROUNDER - ROUNDER;
  const r = x - nf * LN2_64_HI - nf * LN2_64_LO;
  const n = -nf | 0;
  const q = (n + 63) >> 6;
  const p = 1 + r * (1 + r * (0.5 + r * (1 / 6 + r * (1 / 24 + r * (1 / 120 + r * (1 / 720))))));
  return p * EXP_TABLE[(q << 6) - n] * POW2_NEG[q];
}

/**
 * Turn dot products into kernel values: out[j] = sign_j · K from dots[j] (j in [from, to)), where
 * sign_j = +1 unless `y` is given, then y[j]·yi (the Q-matrix sign). `sqA` is ‖A_i‖² (RBF only).
 */
function finishKernelRow(
  spec: KernelSpec,
  dots: Float64Array,
  sqA: number,
  sqB: Float64Array | null,
  from: number,
  to: number,
  out: Floats,
  y: Int8Array | null,
  yi: number,
): void {
  if (spec.type === 'rbf') {
    if (!sqB) throw new EngineInputError('RBF kernel rows need squared row norms');
    const gamma = spec.gamma;
    if (y === null) {
      for (let j = from; j < to; j++) {
        const dist2 = sqA + sqB[j] - 2 * dots[j];
        out[j] = expNonPositive(-gamma * (dist2 > 0 ? dist2 : 0));
      }
    } else {
      for (let j = from; j < to; j++) {
        const dist2 = sqA + sqB[j] - 2 * dots[j];
        // sign by multiplication: labels are mixed, a branch here would be mispredicted half the time
        out[j] = y[j] * yi * expNonPositive(-gamma * (dist2 > 0 ? dist2 : 0));
      }
    }
  } else if (spec.type === 'poly') {
    const { gamma, coef0, degree } = spec;
    for (let j = from; j < to; j++) out[j] = (y === null ? 1 : y[j] * yi) * Math.pow(gamma * dots[j] + coef0, degree);
  } else {
    for (let j = from; j < to; j++) out[j] = (y === null ? 1 : y[j] * yi) * dots[j];
  }
}

/**
 * out[j] = K(A row i, B row j) for j in [from, to). A and B are raw row-major arrays with d columns;
 * sqA / sqB are their squared row norms (needed for RBF only, may be null otherwise). `scratch`
 * (length ≥ to) holds the dot products; it may be omitted when `out` is a Float64Array.
 */
export function fillKernelRow(
  spec: KernelSpec,
  A: Floats,
  i: number,
  B: Floats,
  d: number,
  from: number,
  to: number,
  out: Floats,
  sqA: Float64Array | null,
  sqB: Float64Array | null,
  scratch: Float64Array | null = null,
): void {
  const dots = scratch ?? (out instanceof Float64Array ? out : new Float64Array(to));
  dotProducts(A, i * d, B, d, from, to, dots);
  finishKernelRow(spec, dots, sqA ? sqA[i] : 0, sqB, from, to, out, null, 0);
}

/**
 * Column i of Q for the symmetric case: out[j] = y[i]·y[j]·K(X_i, X_j) for j in [from, to), with
 * `scratch` (Float64Array, length ≥ to) for the dot products.
 */
export function fillQColumn(
  spec: KernelSpec,
  X: Float64Array,
  d: number,
  i: number,
  from: number,
  to: number,
  out: Floats,
  sq: Float64Array | null,
  y: Int8Array,
  scratch: Float64Array,
): void {
  dotProducts(X, i * d, X, d, from, to, scratch);
  finishKernelRow(spec, scratch, sq ? sq[i] : 0, sq, from, to, out, y, y[i]);
}

/** Support vectors (αᵢ > 0) packed contiguously: rows, coefficients αᵢyᵢ and squared norms. */
function packSupportVectors(X: DenseRows, y: Int8Array, alpha: Float64Array) {
  const d = X.cols;
  const index: number[] = [];
  for (let i = 0; i < alpha.length; i++) if (alpha[i] > 0) index.push(i);
  const m = index.length;
  const rows = new Float64Array(m * d);
  const coef = new Float64Array(m);
  for (let s = 0; s < m; s++) {
    const i = index[s];
    coef[s] = alpha[i] * y[i];
    for (let k = 0; k < d; k++) rows[s * d + k] = X.data[i * d + k];
  }
  const packed: DenseRows = { data: rows, rows: m, cols: d };
  return { packed, coef, sq: rowSquaredNorms(packed) };
}

/**
 * Kernel expansion f(x) = Σ αᵢyᵢK(xᵢ, x) + b over the training rows with αᵢ > 0, for every row of X.
 */
export function kernelExpansion(
  kernel: KernelSpec,
  train: BinaryProblem,
  alpha: Float64Array,
  b: number,
  X: DenseRows,
): Float64Array {
  const d = train.X.cols;
  if (X.cols !== d) throw new EngineInputError(`kernel expansion: X has ${X.cols} columns, training data ${d}`);
  if (alpha.length !== train.X.rows) throw new EngineInputError('kernel expansion: one α per training row needed');
  const out = new Float64Array(X.rows);
  const { packed, coef, sq } = packSupportVectors(train.X, train.y, alpha);
  const sqX = kernel.type === 'rbf' ? rowSquaredNorms(X) : null;
  const k = new Float64Array(packed.rows);
  for (let r = 0; r < X.rows; r++) {
    fillKernelRow(kernel, X.data, r, packed.data, d, 0, packed.rows, k, sqX, sq);
    let f = b;
    for (let s = 0; s < coef.length; s++) f += coef[s] * k[s];
    out[r] = f;
  }
  return out;
}

/**
 * f(x) = Σ αᵢyᵢK(xᵢ, x) + b over the support vectors (αᵢ > 0) of `solution`, for every row of X.
 * For a linear kernel with a primal weight vector, f(x) = w·x + b.
 */
export function decisionValues(train: BinaryProblem, solution: BinarySolution, X: DenseRows): Float64Array {
  const d = train.X.cols;
  if (X.cols !== d) throw new EngineInputError(`decisionValues: X has ${X.cols} columns, training data ${d}`);
  if (solution.kernel.type === 'linear' && solution.w) {
    const w = solution.w;
    const out = new Float64Array(X.rows);
    for (let r = 0; r < X.rows; r++) out[r] = dotRows(w, 0, X.data, r * d, d) + solution.b;
    return out;
  }
  return kernelExpansion(solution.kernel, train, solution.alpha, solution.b, X);
}
