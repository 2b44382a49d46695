import { afterAll, describe, expect, it } from 'vitest';
import { spawnSync } from 'node:child_process';
import { readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { loadBreastCancer, loadIris, standardise } from './datasets';
import { makeTempDir, readLibsvmModel, runSvmTrain, supportVectorRows, writeSparseFile } from './reference-tools';
import type { DenseRows } from '@/lib/margin/types';

const bin = fileURLToPath(new URL('../../bin/borderline', import.meta.url));
const { dir, cleanup } = makeTempDir('borderline-cli-');
afterAll(cleanup);

function run(args: string[]): { code: number | null; stdout: string; stderr: string } {
  // Run from the temporary directory: the shim must work from any working directory.
  const r = spawnSync(bin, args, { cwd: dir, encoding: 'utf8', timeout: 120_000 });
  return { code: r.status, stdout: r.stdout, stderr: r.stderr };
}

function writeCsv(name: string, ids: string[], labels: string[], X: DenseRows): string {
  const lines = [['id', 'label', ...Array.from({ length: X.cols }, (_, j) => `f${j + 1}`)].join(',')];
  for (let i = 0; i < X.rows; i++) lines.push([ids[i], labels[i], ...Array.from(X.data.subarray(i * X.cols, (i + 1) * X.cols), String)].join(','));
  writeFileSync(join(dir, name), lines.join('\n') + '\n');
  return name;
}

const bc = loadBreastCancer();
const bcIds = Array.from({ length: bc.X.rows }, (_, i) => `bc-${i + 1}`);
const bcLabels = Array.from(bc.labels, (k) => bc.classNames[k]); // malignant / benign
const bcStd = standardise(bc.X);
writeCsv('bc.csv', bcIds, bcLabels, bc.X);
writeCsv('bc-std.csv', bcIds, bcLabels, bcStd);

interface FitJson {
  classes: string[];
  model: Record<string, unknown> & { marginWidth: number; supportCount: number; b: number; boundaries?: Record<string, unknown>[]; confusion?: number[][] };
  samples: { id: string; label: string; decision: number; margin: number; distance: number; alpha: number; flags: string[]; predicted?: string; boundaries?: unknown[] }[];
}

describe('borderline fit', () => {
  it('prints a summary and writes the JSON contract (two classes)', () => {
    const r = run(['fit', 'bc.csv', '--json', 'bc.json']);
    expect(r.stderr).toBe('');
    expect(r.code).toBe(0);
    expect(r.stdout).toContain('bc.csv: 569 samples, 30 features, 2 classes: benign, malignant (y = +1 for malignant)');
    expect(r.stdout).toMatch(/margin width [0-9.]+/);
    expect(r.stdout).toMatch(/converged yes after \d+ iterations, duality gap/);
    expect(r.stdout).toMatch(/wrong side \d+, inside margin \d+/);
    const j = JSON.parse(readFileSync(join(dir, 'bc.json'), 'utf8')) as FitJson;
    expect(j.classes).toEqual(['benign', 'malignant']); // sorted
    for (const key of ['kernel', 'C', 'solver', 'b', 'supportCount', 'dualObjective', 'primalObjective', 'dualityGap', 'iterations', 'converged', 'separable', 'marginWidth']) {
      expect(j.model).toHaveProperty(key);
    }
    expect(j.model.kernel).toEqual({ type: 'linear' });
    expect(j.model.C).toBe(1);
    expect(j.model.solver).toBe('smo');
    expect(j.model.converged).toBe(true);
    expect(j.model.dualityGap as number).toBeGreaterThanOrEqual(0);
    expect(j.samples.map((s) => s.id)).toEqual(bcIds); // file order
    const wNorm = 2 / j.model.marginWidth;
    let sv = 0;
    j.samples.forEach((s, i) => {
      expect(Object.keys(s)).toEqual(expect.arrayContaining(['id', 'label', 'decision', 'margin', 'distance', 'alpha', 'flags']));
      expect(s.label).toBe(bcLabels[i]);
      const y = s.label === 'malignant' ? 1 : -1; // y = +1 means classes[1]
      expect(s.margin).toBeCloseTo(y * s.decision, 12);
      expect(s.distance).toBeCloseTo(s.decision / wNorm, 9);
      expect(s.flags.includes('wrong-side')).toBe(s.margin < 0);
      if (s.alpha > 0) sv++;
    });
    expect(sv).toBe(j.model.supportCount);
  });

  it('linear margins agree with LIBSVM svm-train on the same standardised data', () => {
    // reference: LIBSVM svm-train (Debian libsvm-tools), run here: -s 0 -t 0 -c 1 -e 1e-5, same data
    // as bc-std.csv (standardised in the test; the CLI runs with --scale none so both see identical doubles).
    const r = run(['fit', 'bc-std.csv', '--scale', 'none', '--tol', '1e-5', '--json', 'bc-std.json']);
    expect(r.code).toBe(0);
    const j = JSON.parse(readFileSync(join(dir, 'bc-std.json'), 'utf8')) as FitJson;
    const y = bcLabels.map((l) => (l === 'malignant' ? 1 : -1));
    const data = join(dir, 'bc.libsvm');
    const modelFile = join(dir, 'bc.model');
    writeSparseFile(data, bcStd, y);
    runSvmTrain(['-s', '0', '-t', '0', '-c', '1', '-e', '1e-5', '-q'], data, modelFile);
    const model = readLibsvmModel(modelFile, bcStd.cols);
    const rows = supportVectorRows(model, bcStd, y);
    // LIBSVM: f(x) = Σ coef_s K(x_s, x) − ρ, positive for the model's first label.
    const sign = model.labels[0] === 1 ? 1 : -1;
    const d = bcStd.cols;
    let worst = 0;
    for (let i = 0; i < bcStd.rows; i++) {
      let f = -model.rho[0];
      rows.forEach((row, s) => {
        let dot = 0;
        for (let k = 0; k < d; k++) dot += bcStd.data[row * d + k] * bcStd.data[i * d + k];
        f += model.svCoef[s][0] * dot;
      });
      worst = Math.max(worst, Math.abs(j.samples[i].margin - y[i] * sign * f));
    }
    expect(worst).toBeLessThan(1e-3);
    expect(j.model.supportCount).toBe(model.totalSv);
  });

  it('writes the multi-class form for Iris (one-vs-rest)', () => {
    const iris = loadIris();
    writeCsv('iris.csv', Array.from({ length: 150 }, (_, i) => `iris-${i + 1}`), Array.from(iris.labels, (k) => iris.classNames[k]), iris.X);
    const r = run(['fit', 'iris.csv', '--json', 'iris.json']);
    expect(r.code).toBe(0);
    expect(r.stdout).toContain('boundary setosa vs rest:');
    const j = JSON.parse(readFileSync(join(dir, 'iris.json'), 'utf8')) as FitJson;
    expect(j.classes).toEqual(['setosa', 'versicolor', 'virginica']);
    expect(j.model.b).toBeNull();
    expect(j.model.boundaries?.map((b) => b.positive)).toEqual(['setosa', 'versicolor', 'virginica']);
    expect(j.model.confusion?.map((row) => row.reduce((a, b) => a + b, 0))).toEqual([50, 50, 50]);
    const s = j.samples[0];
    expect(s.boundaries?.length).toBe(3);
    expect(typeof s.predicted).toBe('string');
  });

  it('hard margin on the hand-worked four points (width 2, see hand-worked.ts)', () => {
    writeFileSync(join(dir, 'four.csv'), 'id,label,x1,x2\nA,neg,0,0\nB,neg,-1,0\nC,pos,2,0\nD,pos,3,1\n');
    const r = run(['fit', 'four.csv', '--hard', '--scale', 'none', '--json', 'four.json']);
    expect(r.code).toBe(0);
    const j = JSON.parse(readFileSync(join(dir, 'four.json'), 'utf8')) as FitJson;
    expect(j.model.separable).toBe(true);
    expect(j.model.C).toBeNull();
    expect(j.model.marginWidth).toBeCloseTo(2, 4);
    expect(j.samples.map((s) => Math.round(s.margin * 1000) / 1000)).toEqual([1, 2, 1, 2]);
  });
});

describe('borderline --help', () => {
  it('prints the usage and exits 0', () => {
    const r = run(['--help']);
    expect(r.code).toBe(0);
    expect(r.stdout).toContain('borderline fit FILE [--kernel linear|rbf|poly]');
    expect(r.stdout).toContain('borderline audit FILE [--folds k] [--seed n] [--json OUT]');
  });
});

describe('borderline audit', () => {
  it('ranks every sample, most suspicious first', () => {
    const r = run(['audit', 'bc.csv', '--folds', '4', '--seed', '7', '--json', 'audit.json']);
    expect(r.stderr).toBe('');
    expect(r.code).toBe(0);
    expect(r.stdout).toContain('out-of-fold: 4 stratified folds, seed 7');
    expect(r.stdout).toContain('most suspicious (of 569):');
    const j = JSON.parse(readFileSync(join(dir, 'audit.json'), 'utf8')) as { ranking: { id: string; suspicion: number; reasons: string[] }[]; folds: number };
    expect(j.folds).toBe(4);
    expect(j.ranking.length).toBe(569);
    expect(new Set(j.ranking.map((x) => x.id))).toEqual(new Set(bcIds));
    for (let k = 1; k < j.ranking.length; k++) expect(j.ranking[k].suspicion).toBeLessThanOrEqual(j.ranking[k - 1].suspicion);
    expect(j.ranking[0].reasons.length).toBeGreaterThan(0);
  });
});

describe('bad input: exit code 2 and one line on stderr', () => {
  writeFileSync(join(dir, 'ragged.csv'), 'id,label,a,b\ns1,x,1,2\ns2,y,3\n');
  writeFileSync(join(dir, 'nan.csv'), 'id,label,a,b\ns1,x,1,NaN\ns2,y,3,4\n');
  writeFileSync(join(dir, 'inf.jsonl'), '{"id":"a","label":"x","features":[1,"Infinity"]}\n{"id":"b","label":"y","features":[1,2]}\n');
  writeFileSync(join(dir, 'one.csv'), 'id,label,a\ns1,x,1\ns2,x,2\n');
  writeFileSync(join(dir, 'dup.csv'), 'id,label,a\ns1,x,1\ns2,y,2\ns1,y,3\n');
  writeFileSync(join(dir, 'count.jsonl'), '{"id":"a","label":"x","features":[1,2]}\n{"id":"b","label":"y","features":[1]}\n');
  const cases: [string, string[], string][] = [
    ['unknown option', ['fit', 'bc.csv', '--frobnicate'], 'borderline: unknown option --frobnicate (see borderline --help)'],
    ['option without value', ['fit', 'bc.csv', '--C'], 'borderline: option --C needs a value (see borderline --help)'],
    ['bad number', ['fit', 'bc.csv', '--C', 'abc'], 'borderline: --C expects a positive number, got "abc" (see borderline --help)'],
    ['bad kernel', ['fit', 'bc.csv', '--kernel', 'sigmoid'], 'borderline: --kernel expects one of linear, rbf, poly, got "sigmoid" (see borderline --help)'],
    ['dcd with rbf', ['fit', 'bc.csv', '--solver', 'dcd', '--kernel', 'rbf'], 'borderline: --solver dcd solves the linear kernel only; use --solver smo for --kernel rbf (see borderline --help)'],
    ['hard with dcd', ['fit', 'bc.csv', '--hard', '--solver', 'dcd'], 'borderline: --hard runs its own exact test and SMO; it does not take --solver dcd (see borderline --help)'],
    ['folds on fit', ['fit', 'bc.csv', '--folds', '3'], 'borderline: fit: unknown option --folds (it belongs to audit) (see borderline --help)'],
    ['unknown command', ['train', 'bc.csv'], 'borderline: unknown command "train" (expected fit or audit) (see borderline --help)'],
    ['missing file argument', ['audit'], 'borderline: audit: missing FILE (see borderline --help)'],
    ['unreadable file', ['fit', 'missing.csv'], 'missing.csv: cannot read file (no such file)'],
    ['ragged rows', ['fit', 'ragged.csv'], 'ragged.csv: row 3, column 4 (b): expected 4 fields as in the header, found 3'],
    ['NaN', ['fit', 'nan.csv'], 'nan.csv: row 2, column 4 (b): "NaN" is not a finite number'],
    ['infinite value', ['audit', 'inf.jsonl'], 'inf.jsonl: row 1, column features[1]: "Infinity" is not a finite number'],
    ['one class only', ['fit', 'one.csv'], 'one.csv: column 2 (label): only one class ("x") among 2 samples; at least two classes are needed'],
    ['duplicate ids', ['audit', 'dup.csv'], 'dup.csv: row 4, column 1 (id): duplicate id "s1" (first on row 2)'],
    ['wrong feature count', ['fit', 'count.jsonl'], 'count.jsonl: row 2, column features: expected 2 features as on row 1, found 1'],
  ];
  for (const [name, args, line] of cases) {
    it(name, () => {
      const r = run(args);
      expect(r.code).toBe(2);
      expect(r.stderr).toBe(`${line}\n`);
      expect(r.stdout).toBe('');
    });
  }
});
