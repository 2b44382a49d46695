/**
 * The Boundary screen's 2-D picture of one boundary (pure; no database, no React).
 *
 *   horizontal  x = f(x)/‖w‖, the signed distance to the hyperplane (f(x) = w·x + b). For a
 *               kernel fit this is the signed distance in the kernel's feature space (‖w‖² = αᵀQα),
 *               i.e. the decision value scaled by one constant, so the margin band is still
 *               |x| ≤ 1/‖w‖.
 *   vertical    y = projection of the centred input on the leading principal direction v of the
 *               data with the w component removed: v is the top eigenvector of
 *               P·Σ·P, P = I − ŵŵᵀ, Σ the covariance of the (preprocessed) rows, so v ⟂ w and the
 *               two axes show independent information. Kernel fits have no w in input space: there
 *               v is the leading principal direction of the preprocessed inputs themselves — a
 *               stand-in that shows the spread of the data, not a direction of the feature space.
 *
 * Rows are the fit's preprocessed inputs (the same standardisation / L2 normalisation the model
 * was trained with). The direction is estimated on at most `maxDirectionRows` evenly spaced rows
 * (a d×d eigenproblem with ml-matrix), then every row is projected. Sign convention: the first
 * component of v with |v_j| > 1e-9 is positive, so the picture does not flip between renders.
 */
import { EigenvalueDecomposition, Matrix } from 'ml-matrix';

export interface Rows {
  readonly data: Float64Array | Float32Array;
  readonly rows: number;
  readonly cols: number;
}

export interface Direction {
  /** unit vector, length cols */
  readonly v: Float64Array;
  /** variance of the (w-removed) data along v */
  readonly variance: number;
  /** share of the (w-removed) total variance along v, in [0, 1] (0 when the data have none) */
  readonly share: number;
  /** mean of the rows used, subtracted before projecting */
  readonly mean: Float64Array;
}

export const DEFAULT_MAX_DIRECTION_ROWS = 4000;

/** Indices of at most `max` evenly spaced rows of n. */
function sampleIndex(n: number, max: number): number[] {
  if (n <= max) return Array.from({ length: n }, (_, i) => i);
  const out: number[] = [];
  for (let k = 0; k < max; k++) out.push(Math.floor((k * n) / max));
  return out;
}

/**
 * Leading principal direction of the rows after removing the component along `remove` (null: plain
 * PCA). The result is orthogonal to `remove` up to rounding (re-orthogonalised explicitly).
 */
export function leadingDirection(X: Rows, remove: Float64Array | null, maxDirectionRows = DEFAULT_MAX_DIRECTION_ROWS): Direction {
  const { rows: n, cols: d, data } = X;
  if (data.length !== n * d) throw new Error(`rows hold ${data.length} values, expected ${n * d}`);
  if (remove && remove.length !== d) throw new Error(`w has ${remove.length} components, rows have ${d}`);
  const mean = new Float64Array(d);
  if (n === 0 || d === 0) return { v: new Float64Array(d), variance: 0, share: 0, mean };
  const idx = sampleIndex(n, maxDirectionRows);
  for (const i of idx) for (let j = 0; j < d; j++) mean[j] += data[i * d + j];
  for (let j = 0; j < d; j++) mean[j] /= idx.length;
  let u: Float64Array | null = null;
  if (remove) {
    let s = 0;
    for (let j = 0; j < d; j++) s += remove[j] * remove[j];
    if (s > 0) {
      const norm = Math.sqrt(s);
      u = Float64Array.from(remove, (x) => x / norm);
    }
  }
  // Centred (and w-removed) sample rows → covariance d×d.
  const Z = new Matrix(idx.length, d);
  const row = new Float64Array(d);
  idx.forEach((i, r) => {
    for (let j = 0; j < d; j++) row[j] = data[i * d + j] - mean[j];
    if (u) {
      let t = 0;
      for (let j = 0; j < d; j++) t += row[j] * u[j];
      for (let j = 0; j < d; j++) row[j] -= t * u[j];
    }
    for (let j = 0; j < d; j++) Z.set(r, j, row[j]);
  });
  const cov = Z.transpose().mmul(Z).div(idx.length);
  const eig = new EigenvalueDecomposition(cov, { assumeSymmetric: true });
  const values = eig.realEigenvalues;
  let best = 0;
  for (let k = 1; k < values.length; k++) if (values[k] > values[best]) best = k;
  const total = values.reduce((s, x) => s + Math.max(0, x), 0);
  const v = Float64Array.from(eig.eigenvectorMatrix.getColumn(best));
  if (u) {
    let t = 0;
    for (let j = 0; j < d; j++) t += v[j] * u[j];
    for (let j = 0; j < d; j++) v[j] -= t * u[j];
  }
  let s = 0;
  for (let j = 0; j < d; j++) s += v[j] * v[j];
  const norm = Math.sqrt(s);
  if (norm > 0) for (let j = 0; j < d; j++) v[j] /= norm;
  const first = v.findIndex((x) => Math.abs(x) > 1e-9);
  if (first >= 0 && v[first] < 0) for (let j = 0; j < d; j++) v[j] = -v[j];
  const variance = Math.max(0, values[best]);
  return { v, variance, share: total > 0 ? variance / total : 0, mean };
}

export interface BoundaryPicture {
  /** signed distance f(x)/‖w‖ per row (the decision value when ‖w‖ is 0 or not finite) */
  readonly x: Float64Array;
  /** position along the vertical direction per row */
  readonly y: Float64Array;
  readonly direction: Direction;
  /** 'orthogonal-to-w' (linear fits) or 'input-pca' (kernel fits: stand-in, see the file comment) */
  readonly vertical: 'orthogonal-to-w' | 'input-pca';
  /** half-width of the margin band on the x axis: 1/‖w‖ (null when ‖w‖ is 0 or not finite) */
  readonly band: number | null;
}

/**
 * The picture of one boundary: `decision` holds f(x) per row (as stored with the fit), `w` the
 * primal weights in preprocessed input space for a linear fit (null for kernel fits).
 */
export function boundaryPicture(X: Rows, decision: ArrayLike<number>, wNorm: number, w: Float64Array | null, maxDirectionRows = DEFAULT_MAX_DIRECTION_ROWS): BoundaryPicture {
  if (decision.length !== X.rows) throw new Error(`${decision.length} decision values for ${X.rows} rows`);
  const usable = Number.isFinite(wNorm) && wNorm > 0;
  const x = new Float64Array(X.rows);
  for (let i = 0; i < X.rows; i++) x[i] = usable ? decision[i] / wNorm : decision[i];
  const direction = leadingDirection(X, w, maxDirectionRows);
  const y = new Float64Array(X.rows);
  const d = X.cols;
  for (let i = 0; i < X.rows; i++) {
    let t = 0;
    for (let j = 0; j < d; j++) t += (X.data[i * d + j] - direction.mean[j]) * direction.v[j];
    y[i] = t;
  }
  return { x, y, direction, vertical: w ? 'orthogonal-to-w' : 'input-pca', band: usable ? 1 / wNorm : null };
}
