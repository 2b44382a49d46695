/**
 * Helpers to run the reference implementations LIBSVM (`svm-train`) and LIBLINEAR (`liblinear-train`)
 * from Debian's libsvm-tools / liblinear-tools on the same data as our solvers, and to read back
 * their model files and console output.
 *
 * Nothing here skips quietly: a missing tool raises an error that says how to install it.
 */
import { execFileSync } from 'node:child_process';
import { existsSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { delimiter, join } from 'node:path';
import type { DenseRows } from '@/lib/margin/types';

export type ReferenceTool = 'svm-train' | 'svm-predict' | 'liblinear-train' | 'liblinear-predict';

const INSTALL_HINT = 'apt-get install -y libsvm-tools liblinear-tools';

/** Absolute path of a reference tool on PATH (or /usr/bin); throws with an install hint if missing. */
export function requireTool(tool: ReferenceTool): string {
  const dirs = [...(process.env.PATH ?? '').split(delimiter), '/usr/bin', '/usr/local/bin'];
  for (const dir of dirs) {
    if (!dir) continue;
    const p = join(dir, tool);
    if (existsSync(p)) return p;
  }
  throw new Error(`reference tool "${tool}" not found on PATH; install it with: ${INSTALL_HINT}`);
}

/** A fresh temporary directory under os.tmpdir() and a function that removes it. */
export function makeTempDir(prefix = 'borderline-ref-'): { dir: string; cleanup: () => void } {
  const dir = mkdtempSync(join(tmpdir(), prefix));
  return { dir, cleanup: () => rmSync(dir, { recursive: true, force: true }) };
}

/**
 * Text of a LIBSVM / LIBLINEAR sparse data file: "label index:value …" per row, 1-based indices,
 * zero features omitted. Numbers are written with JavaScript's shortest round-trip representation,
 * which strtod reads back to the identical double.
 */
export function sparseFileText(X: DenseRows, labels: ArrayLike<number>): string {
  const { rows, cols, data } = X;
  if (labels.length !== rows) throw new Error(`sparseFileText: ${labels.length} labels for ${rows} rows`);
  const lines: string[] = new Array<string>(rows);
  for (let i = 0; i < rows; i++) {
    const parts: string[] = [String(labels[i])];
    for (let k = 0; k < cols; k++) {
      const v = data[i * cols + k];
      if (v !== 0) parts.push(`${k + 1}:${String(v)}`);
    }
    lines[i] = parts.join(' ');
  }
  return lines.join('\n') + '\n';
}

export function writeSparseFile(path: string, X: DenseRows, labels: ArrayLike<number>): void {
  writeFileSync(path, sparseFileText(X, labels));
}

export interface ToolRun {
  readonly stdout: string;
  readonly seconds: number;
}

/** Run a reference tool with execFileSync; returns its stdout and wall time in seconds. */
export function runTool(tool: ReferenceTool, args: readonly string[], timeoutMs = 600_000): ToolRun {
  const bin = requireTool(tool);
  const t0 = process.hrtime.bigint();
  const stdout = execFileSync(bin, [...args], { encoding: 'utf8', timeout: timeoutMs, maxBuffer: 64 * 1024 * 1024 });
  const seconds = Number(process.hrtime.bigint() - t0) / 1e9;
  return { stdout, seconds };
}

/** svm-train [options] data model. */
export function runSvmTrain(options: readonly string[], dataFile: string, modelFile: string): ToolRun {
  return runTool('svm-train', [...options, dataFile, modelFile]);
}

/** liblinear-train [options] data model. */
export function runLiblinearTrain(options: readonly string[], dataFile: string, modelFile: string): ToolRun {
  return runTool('liblinear-train', [...options, dataFile, modelFile]);
}

function matchNumber(text: string, re: RegExp): number | null {
  const m = re.exec(text);
  return m ? Number(m[1]) : null;
}

/** What svm-train prints for one binary subproblem: "#iter = …", "obj = …, rho = …", "nSV = …, nBSV = …". */
export interface SvmTrainLog {
  readonly iterations: number;
  /** LIBSVM's minimisation value ½αᵀQα − eᵀα, printed with 6 decimals. */
  readonly obj: number;
  readonly rho: number;
  readonly nSV: number;
  readonly nBSV: number;
}

export function parseSvmTrainOutput(stdout: string): SvmTrainLog {
  const iterations = matchNumber(stdout, /#iter = (\d+)/);
  const obj = matchNumber(stdout, /obj = (-?[\d.eE+-]+),/);
  const rho = matchNumber(stdout, /rho = (-?[\d.eE+-]+)/);
  const nSV = matchNumber(stdout, /nSV = (\d+),/);
  const nBSV = matchNumber(stdout, /nBSV = (\d+)/);
  if (iterations === null || obj === null || rho === null || nSV === null || nBSV === null) {
    throw new Error(`could not parse svm-train output:\n${stdout}`);
  }
  return { iterations, obj, rho, nSV, nBSV };
}

/** What liblinear-train prints: "#iter = …", "Objective value = …", "nSV = …" (each may be absent). */
export interface LiblinearTrainLog {
  readonly iterations: number | null;
  readonly objective: number | null;
  readonly nSV: number | null;
}

export function parseLiblinearOutput(stdout: string): LiblinearTrainLog {
  return {
    iterations: matchNumber(stdout, /#iter = (\d+)/),
    objective: matchNumber(stdout, /Objective value = (-?[\d.eE+-]+)/),
    nSV: matchNumber(stdout, /nSV = (\d+)/),
  };
}

/** Header lines of a model file ("key v1 v2 …") up to the line `stopAt`, and the remaining lines. */
function splitModel(text: string, stopAt: string): { header: Map<string, string[]>; body: string[] } {
  const lines = text.split('\n');
  const header = new Map<string, string[]>();
  let k = 0;
  for (; k < lines.length; k++) {
    const line = lines[k].trim();
    if (line === stopAt) break;
    if (!line) continue;
    const [key, ...vals] = line.split(/\s+/);
    header.set(key, vals);
  }
  if (k === lines.length) throw new Error(`model file has no "${stopAt}" line`);
  return { header, body: lines.slice(k + 1).filter((s) => s.trim() !== '') };
}

function headerNumbers(header: Map<string, string[]>, key: string): number[] {
  const v = header.get(key);
  if (!v) throw new Error(`model file lacks "${key}"`);
  return v.map(Number);
}

export interface LibsvmModel {
  readonly svmType: string;
  readonly kernelType: string;
  readonly gamma: number | null;
  readonly degree: number | null;
  readonly coef0: number | null;
  readonly nrClass: number;
  readonly totalSv: number;
  /** One ρ per class pair; decision of pair (0, 1) is Σ coef·K − ρ, positive for labels[0]. */
  readonly rho: number[];
  /** Class labels in the model's internal order. */
  readonly labels: number[];
  /** Support vectors per class, in label order. */
  readonly nrSv: number[];
  /** Per support vector: nrClass − 1 coefficients (αᵢyᵢ in the pairwise problems). */
  readonly svCoef: number[][];
  /** Per support vector: dense feature vector of length `cols` (as printed, %.8g). */
  readonly sv: Float64Array[];
}

function optionalNumber(header: Map<string, string[]>, key: string): number | null {
  const v = header.get(key);
  return v ? Number(v[0]) : null;
}

/** Parse a LIBSVM model file (svm_save_model format); `cols` is the feature dimension. */
export function parseLibsvmModel(text: string, cols: number): LibsvmModel {
  const { header, body } = splitModel(text, 'SV');
  const nrClass = headerNumbers(header, 'nr_class')[0];
  const svCoef: number[][] = [];
  const sv: Float64Array[] = [];
  for (const line of body) {
    const tokens = line.trim().split(/\s+/);
    svCoef.push(tokens.slice(0, nrClass - 1).map(Number));
    const x = new Float64Array(cols);
    for (const t of tokens.slice(nrClass - 1)) {
      const [idx, val] = t.split(':');
      const j = Number(idx) - 1;
      if (j >= 0 && j < cols) x[j] = Number(val);
    }
    sv.push(x);
  }
  return {
    svmType: (header.get('svm_type') ?? [''])[0],
    kernelType: (header.get('kernel_type') ?? [''])[0],
    gamma: optionalNumber(header, 'gamma'),
    degree: optionalNumber(header, 'degree'),
    coef0: optionalNumber(header, 'coef0'),
    nrClass,
    totalSv: headerNumbers(header, 'total_sv')[0],
    rho: headerNumbers(header, 'rho'),
    labels: headerNumbers(header, 'label'),
    nrSv: headerNumbers(header, 'nr_sv'),
    svCoef,
    sv,
  };
}

export function readLibsvmModel(path: string, cols: number): LibsvmModel {
  return parseLibsvmModel(readFileSync(path, 'utf8'), cols);
}

/**
 * Training row of every support vector of a LIBSVM model. svm-train groups the rows by class (in the
 * model's label order) and keeps the original order inside each class, so the support vectors of a
 * class are a subsequence of that class's rows; each is matched to the next row whose features agree
 * with the printed ones (8 significant digits). Throws if a support vector cannot be matched.
 * Rows with identical features and label cannot be told apart; the earliest unmatched one is taken
 * (their kernel values are identical, so decision values do not depend on the choice).
 */
export function supportVectorRows(model: LibsvmModel, X: DenseRows, labels: ArrayLike<number>): Int32Array {
  const out = new Int32Array(model.totalSv);
  const { cols } = X;
  let s = 0;
  model.labels.forEach((label, c) => {
    let row = 0;
    for (let t = 0; t < model.nrSv[c]; t++, s++) {
      const target = model.sv[s];
      for (; row < X.rows; row++) {
        if (labels[row] !== label) continue;
        let same = true;
        for (let k = 0; k < cols && same; k++) {
          const v = X.data[row * cols + k];
          same = Math.abs(v - target[k]) <= 1e-7 * Math.max(1, Math.abs(v));
        }
        if (same) break;
      }
      if (row === X.rows) throw new Error(`support vector ${s} (label ${label}) matches no training row`);
      out[s] = row++;
    }
  });
  return out;
}

export interface LiblinearModel {
  readonly solverType: string;
  readonly nrClass: number;
  readonly labels: number[];
  readonly nrFeature: number;
  /** The -B value; negative when no bias feature was used. */
  readonly bias: number;
  /**
   * Weights, row-major (nrFeature + (bias ≥ 0 ? 1 : 0)) × nrWeightVectors, where a binary model has
   * one weight vector (positive for labels[0]) and a k-class model has k.
   */
  readonly w: Float64Array;
  readonly nrWeightVectors: number;
}

/** Parse a LIBLINEAR model file (save_model format). */
export function parseLiblinearModel(text: string): LiblinearModel {
  const { header, body } = splitModel(text, 'w');
  const nrClass = headerNumbers(header, 'nr_class')[0];
  const nrFeature = headerNumbers(header, 'nr_feature')[0];
  const bias = headerNumbers(header, 'bias')[0];
  const rows = nrFeature + (bias >= 0 ? 1 : 0);
  const nrWeightVectors = nrClass === 2 ? 1 : nrClass;
  const values = body.flatMap((line) => line.trim().split(/\s+/).map(Number));
  if (values.length !== rows * nrWeightVectors) {
    throw new Error(`LIBLINEAR model: expected ${rows * nrWeightVectors} weights, found ${values.length}`);
  }
  return {
    solverType: (header.get('solver_type') ?? [''])[0],
    nrClass,
    labels: headerNumbers(header, 'label'),
    nrFeature,
    bias,
    w: Float64Array.from(values),
    nrWeightVectors,
  };
}

export function readLiblinearModel(path: string): LiblinearModel {
  return parseLiblinearModel(readFileSync(path, 'utf8'));
}
