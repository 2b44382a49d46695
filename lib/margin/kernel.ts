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

function fillLinear(A: Floats, d: number, ao: number, B: Floats, from: number, to: number, out: Floats): void {
  for (let j = from; j < to; j++) {
    const bo = j * d;
    let s0 = 0;
    let s1 = 0;
    let k = 0;
    for (; k + 1 < d; k += 2) {
      s0 += A[ao + k] * B[bo + k];
      s1 += A[ao + k + 1] * B[bo + k + 1];
    }
    if (k < d) s0 += A[ao + k] * B[bo + k];
    out[j] = s0 + s1;
  }
}

function fillRbf(
  A: Floats,
  d: number,
  ao: number,
  sqA: number,
  B: Floats,
  sqB: Float64Array,
  gamma: number,
  from: number,
  to: number,
  out: Floats,
): void {
  for (let j = from; j < to; j++) {
    const bo = j * d;
    let s0 = 0;
    let s1 = 0;
    let k = 0;
    for (; k + 1 < d; k += 2) {
      s0 += A[ao + k] * B[bo + k];
      s1 += A[ao + k + 1] * B[bo + k + 1];
    }
    if (k < d) s0 += A[ao + k] * B[bo + k];
    let dist2 = sqA + sqB[j] - 2 * (s0 + s1);
    if (dist2 < 0) dist2 = 0;
    out[j] = Math.exp(-gamma * dist2);
  }
}

function fillPoly(
  A: Floats,
  d: number,
  ao: number,
  B: Floats,
  gamma: number,
  coef0: number,
  degree: number,
  from: number,
  to: number,
  out: Floats,
): void {
  for (let j = from; j < to; j++) {
    const bo = j * d;
    let s = 0;
    for (let k = 0; k < d; k++) s += A[ao + k] * B[bo + k];
    out[j] = Math.pow(gamma * s + coef0, degree);
  }
}

/**
 * out[j] = K(A row i, B row j) for j in [from, to). A and B are raw row-major arrays with d columns;
 * sqA / sqB are their squared row norms (needed for RBF only, may be null otherwise).
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
): void {
  const ao = i * d;
  switch (spec.type) {
    case 'linear':
      fillLinear(A, d, ao, B, from, to, out);
      return;
    case 'rbf':
      if (!sqA || !sqB) throw new EngineInputError('fillKernelRow: RBF needs squared row norms');
      fillRbf(A, d, ao, sqA[i], B, sqB, spec.gamma, from, to, out);
      return;
    case 'poly':
      fillPoly(A, d, ao, B, spec.gamma, spec.coef0, spec.degree, from, to, out);
      return;
  }
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
