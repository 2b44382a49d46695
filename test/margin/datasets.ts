/**
 * Loaders for the open data sets copied into test/fixtures (provenance in test/fixtures/README.md).
 * Both files use scikit-learn's bundled layout: a header "rows,features,className0,className1,…",
 * then one row per sample with the features followed by the integer class index.
 */
import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { parse } from 'csv-parse/sync';
import type { BinaryProblem, DenseRows } from '@/lib/margin/types';

export interface LabelledData {
  readonly X: DenseRows;
  /** Class index per row (0-based, as in the file). */
  readonly labels: Int32Array;
  readonly classNames: readonly string[];
}

const fixturesDir = fileURLToPath(new URL('../fixtures/', import.meta.url));

function loadSklearnCsv(file: string): LabelledData {
  const records = parse(readFileSync(fixturesDir + file, 'utf8'), { skip_empty_lines: true, relax_column_count: true }) as string[][];
  const header = records[0];
  const rows = Number(header[0]);
  const cols = Number(header[1]);
  const classNames = header.slice(2);
  if (records.length - 1 !== rows) throw new Error(`${file}: header says ${rows} rows, found ${records.length - 1}`);
  const data = new Float64Array(rows * cols);
  const labels = new Int32Array(rows);
  for (let i = 0; i < rows; i++) {
    const rec = records[i + 1];
    if (rec.length !== cols + 1) throw new Error(`${file}: row ${i} has ${rec.length} fields`);
    for (let k = 0; k < cols; k++) data[i * cols + k] = Number(rec[k]);
    labels[i] = Number(rec[cols]);
  }
  return { X: { data, rows, cols }, labels, classNames };
}

/** UCI Breast Cancer Wisconsin (Diagnostic): 569 × 30, classes malignant (0) / benign (1). */
export function loadBreastCancer(): LabelledData {
  return loadSklearnCsv('breast_cancer.csv');
}

/** Fisher's Iris: 150 × 4, classes setosa (0) / versicolor (1) / virginica (2). */
export function loadIris(): LabelledData {
  return loadSklearnCsv('iris.csv');
}

/** Z-score every column (population standard deviation; constant columns become 0). */
export function standardise(X: DenseRows): DenseRows {
  const { rows, cols } = X;
  const out = new Float64Array(rows * cols);
  for (let k = 0; k < cols; k++) {
    let mean = 0;
    for (let i = 0; i < rows; i++) mean += X.data[i * cols + k];
    mean /= rows;
    let v = 0;
    for (let i = 0; i < rows; i++) v += (X.data[i * cols + k] - mean) ** 2;
    const sd = Math.sqrt(v / rows);
    for (let i = 0; i < rows; i++) out[i * cols + k] = sd > 0 ? (X.data[i * cols + k] - mean) / sd : 0;
  }
  return { data: out, rows, cols };
}

/** Rows whose label is in `keep`, with y = +1 for `positive` and −1 otherwise. */
export function binarySubset(d: LabelledData, positive: number, keep: readonly number[]): BinaryProblem {
  const idx: number[] = [];
  for (let i = 0; i < d.X.rows; i++) if (keep.includes(d.labels[i])) idx.push(i);
  const cols = d.X.cols;
  const data = new Float64Array(idx.length * cols);
  const y = new Int8Array(idx.length);
  idx.forEach((r, k) => {
    data.set(d.X.data.subarray(r * cols, (r + 1) * cols), k * cols);
    y[k] = d.labels[r] === positive ? 1 : -1;
  });
  return { X: { data, rows: idx.length, cols }, y };
}
