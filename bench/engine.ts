/**
 * Engine benchmark (DESIGN.md §5), run by `npm run bench:engine`:
 *
 *  1. Large-scale linear fit, 100,000 × 256 dense, C = 1, tol 0.1: our dual coordinate descent
 *     (lib/margin/dcd.ts) against LIBLINEAR's `liblinear-train -s 3 -B 1 -c 1 -e 0.1` on the same data
 *     in the same run. Target: ours ≤ LIBLINEAR, with a comparable dual objective.
 *  2. Warm refit after 20 label changes on the same set: at most 1/10 of the cold fit time.
 *  3. Exact RBF fit, 10,000 × 32 (bench/rbf.ts, LIBSVM's svm-train): within 1.5×, SVs within 1 %.
 *
 * Data (deterministic, pure-rand xoroshiro128+, seed below): rows z ~ N(0, I/256), i.e. about unit
 * length like L2-normalised embeddings; labels y = sign(w*·z) for a planted Gaussian w*, then 5 % of
 * the labels flipped at random. Every value is rounded to 6 significant digits; the LIBLINEAR file holds
 * exactly those decimals, and our Float64Array copy holds the doubles they parse to, so both solvers
 * see identical numbers. The Float32Array copy rounds them to float32 (relative change ≤ 6e-8). Our
 * solver runs on Float32Array rows (the headline), on Float64Array rows (what the engine's
 * preprocessing produces today), and on Float64Array rows with rowPrecision 'float32'; all are printed.
 *
 * Timing: best of REPEATS interleaved runs (the machine is shared), wall and CPU time. Ours: the
 * solveDcd call (process.cpuUsage). LIBLINEAR: liblinear-train's whole run includes parsing the
 * 0.35 GB text file, so its `train()` call is timed on its own: a tiny LD_PRELOAD shim (compiled here
 * with gcc) wraps the `train` symbol of Debian's liblinear.so.4, forwards to the real function and
 * records wall and CPU time around it — the solver time only, in the very same liblinear-train run.
 * Without gcc the shim is skipped and only the process times are shown.
 *
 * Output: a table on stdout and bench/out/engine.json. Missing reference tools are reported as
 * "not installed" (apt-get install -y libsvm-tools liblinear-tools).
 */
import { execFileSync } from 'node:child_process';
import { closeSync, existsSync, mkdirSync, mkdtempSync, openSync, readFileSync, rmSync, writeFileSync, writeSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { unsafeUniformIntDistribution, xoroshiro128plus, type RandomGenerator } from 'pure-rand';
import { dcdWarmStartAfterRelabel, solveDcd, type DcdOptions } from '../lib/margin/dcd';
import type { BinaryProblem, BinarySolution } from '../lib/margin/types';

const ROWS = Number(process.env.BENCH_ROWS ?? 100_000);
const COLS = Number(process.env.BENCH_COLS ?? 256);
const SEED = 20240617;
const NOISE = 0.05;
const FLIPS = 20;
const REPEATS = Number(process.env.BENCH_REPEATS ?? 3);
/** Warm refits, each after its own random set of FLIPS label changes; the median counts. */
const WARM_ROUNDS = 7;
const OPTIONS: DcdOptions = { C: 1, tol: 0.1, seed: 1 };
const OUT_DIR = fileURLToPath(new URL('./out/', import.meta.url));

// ---------------------------------------------------------------------------------------------
// Data

function gaussianSource(g: RandomGenerator): () => number {
  const uniform = (): number => {
    const hi = unsafeUniformIntDistribution(0, (1 << 26) - 1, g);
    const lo = unsafeUniformIntDistribution(0, (1 << 27) - 1, g);
    return (hi * 134217728 + lo + 0.5) / 9007199254740992; // in (0, 1)
  };
  return () => Math.sqrt(-2 * Math.log(uniform())) * Math.cos(2 * Math.PI * uniform());
}

interface BenchData {
  readonly x64: Float64Array;
  readonly x32: Float32Array;
  readonly text: string[]; // the 6-digit decimals, row-major
  readonly y: Int8Array;
}

function makeData(rows: number, cols: number, seed: number): BenchData {
  const g = xoroshiro128plus(seed);
  const gauss = gaussianSource(g);
  const wStar = Float64Array.from({ length: cols }, () => gauss());
  const x64 = new Float64Array(rows * cols);
  const text = new Array<string>(rows * cols);
  const y = new Int8Array(rows);
  const s = 1 / Math.sqrt(cols);
  for (let i = 0; i < rows; i++) {
    let f = 0;
    for (let j = 0; j < cols; j++) {
      const t = (gauss() * s).toPrecision(6);
      const v = Number(t);
      text[i * cols + j] = t;
      x64[i * cols + j] = v;
      f += wStar[j] * v;
    }
    y[i] = f > 0 ? 1 : -1;
  }
  for (let i = 0; i < rows; i++) {
    if (unsafeUniformIntDistribution(0, 999_999, g) < NOISE * 1_000_000) y[i] = -y[i];
  }
  return { x64, x32: Float32Array.from(x64), text, y };
}

function writeLiblinearFile(path: string, data: BenchData, rows: number, cols: number): void {
  const fd = openSync(path, 'w');
  try {
    let chunk = '';
    for (let i = 0; i < rows; i++) {
      let line = data.y[i] > 0 ? '+1' : '-1';
      for (let j = 0; j < cols; j++) {
        const t = data.text[i * cols + j];
        if (Number(t) !== 0) line += ` ${j + 1}:${t}`;
      }
      chunk += line + '\n';
      if (chunk.length > 1 << 22) {
        writeSync(fd, chunk);
        chunk = '';
      }
    }
    writeSync(fd, chunk);
  } finally {
    closeSync(fd);
  }
}

// ---------------------------------------------------------------------------------------------
// Timing

interface Timed<T> {
  readonly wall: number;
  readonly cpu: number;
  readonly value: T;
}

function timeOurs<T>(f: () => T): Timed<T> {
  const c0 = process.cpuUsage();
  const t0 = process.hrtime.bigint();
  const value = f();
  const wall = Number(process.hrtime.bigint() - t0) / 1e9;
  const c = process.cpuUsage(c0);
  return { wall, cpu: (c.user + c.system) / 1e6, value };
}

/** CPU seconds (user + system) of this process's waited-for children, from /proc/self/stat. */
function childrenCpuSeconds(): number {
  const stat = readFileSync('/proc/self/stat', 'utf8');
  const fields = stat.slice(stat.lastIndexOf(')') + 2).split(' ');
  // After "pid (comm) ": field 3 is fields[0]; cutime and cstime are fields 16 and 17.
  const ticks = Number(fields[16 - 3]) + Number(fields[17 - 3]);
  return ticks / 100; // USER_HZ is 100 on Linux
}

const SHIM_SOURCE = `#define _GNU_SOURCE
#include <dlfcn.h>
#include <stdio.h>
#include <stdlib.h>
#include <time.h>
/* struct model *train(const struct problem *, const struct parameter *), passed through untouched. */
void *train(const void *prob, const void *param) {
  void *(*real)(const void *, const void *) = (void *(*)(const void *, const void *))dlsym(RTLD_NEXT, "train");
  struct timespec w0, w1, c0, c1;
  clock_gettime(CLOCK_MONOTONIC, &w0);
  clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &c0);
  void *m = real(prob, param);
  clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &c1);
  clock_gettime(CLOCK_MONOTONIC, &w1);
  const char *path = getenv("BORDERLINE_TRAIN_TIME");
  FILE *f = path ? fopen(path, "w") : NULL;
  if (f) {
    fprintf(f, "%.6f %.6f\\n", (w1.tv_sec - w0.tv_sec) + 1e-9 * (w1.tv_nsec - w0.tv_nsec),
            (c1.tv_sec - c0.tv_sec) + 1e-9 * (c1.tv_nsec - c0.tv_nsec));
    fclose(f);
  }
  return m;
}
`;

/** Build the timing shim; null when gcc is unavailable or the build fails. */
function buildShim(dir: string): string | null {
  const src = join(dir, 'train-timer.c');
  const lib = join(dir, 'train-timer.so');
  writeFileSync(src, SHIM_SOURCE);
  try {
    execFileSync('gcc', ['-O2', '-shared', '-fPIC', src, '-o', lib, '-ldl'], { stdio: 'pipe' });
    return lib;
  } catch {
    return null;
  }
}

function liblinearPath(): string | null {
  for (const p of ['/usr/bin/liblinear-train', '/usr/local/bin/liblinear-train']) if (existsSync(p)) return p;
  return null;
}

interface LiblinearRun {
  readonly objective: number;
  readonly iterations: number;
  readonly w: Float64Array; // w̃ oriented for +1 (last entry: bias weight)
}

interface LiblinearTimes {
  readonly processWall: number;
  readonly processCpu: number;
  /** Wall and CPU seconds of the train() call alone (NaN without the shim). */
  readonly trainWall: number;
  readonly trainCpu: number;
}

function timeLiblinear(bin: string, args: string[], file: string, model: string, shim: string | null): Timed<LiblinearRun> & LiblinearTimes {
  const timeFile = `${model}.time`;
  const env = shim ? { ...process.env, LD_PRELOAD: shim, BORDERLINE_TRAIN_TIME: timeFile } : process.env;
  const cpu0 = childrenCpuSeconds();
  const t0 = process.hrtime.bigint();
  const out = execFileSync(bin, [...args, file, model], { encoding: 'utf8', maxBuffer: 1 << 26, env });
  const wall = Number(process.hrtime.bigint() - t0) / 1e9;
  const cpu = childrenCpuSeconds() - cpu0;
  let trainWall = NaN;
  let trainCpu = NaN;
  if (shim && existsSync(timeFile)) {
    const [tw, tc] = readFileSync(timeFile, 'utf8').trim().split(' ').map(Number);
    trainWall = tw;
    trainCpu = tc;
  }
  const obj = /Objective value = (-?[\d.eE+-]+)/.exec(out);
  const iter = /#iter = (\d+)/.exec(out);
  const text = readFileSync(model, 'utf8');
  const labels = /label (\S+) (\S+)/.exec(text);
  const body = text.slice(text.indexOf('\nw\n') + 3).trim().split(/\s+/).map(Number);
  const sign = labels && Number(labels[1]) === 1 ? 1 : -1;
  return {
    wall,
    cpu,
    processWall: wall,
    processCpu: cpu,
    trainWall,
    trainCpu,
    value: {
      objective: obj ? Number(obj[1]) : NaN,
      iterations: iter ? Number(iter[1]) : NaN,
      w: Float64Array.from(body, (v) => sign * v),
    },
  };
}

function primalOf(p: BinaryProblem, wTilde: Float64Array, C: number): number {
  const { X, y } = p;
  const d = X.cols;
  let reg = 0;
  for (let j = 0; j <= d; j++) reg += wTilde[j] * wTilde[j];
  let loss = 0;
  for (let i = 0; i < X.rows; i++) {
    let f = wTilde[d];
    for (let j = 0; j < d; j++) f += wTilde[j] * X.data[i * d + j];
    loss += Math.max(0, 1 - y[i] * f);
  }
  return 0.5 * reg + C * loss;
}

function best<T>(runs: readonly Timed<T>[]): Timed<T> {
  let b = runs[0];
  for (const r of runs) if (r.wall < b.wall) b = r;
  return { ...b, cpu: Math.min(...runs.map((r) => r.cpu)) };
}

const fmt = (v: number, digits = 3): string => (Number.isFinite(v) ? v.toFixed(digits) : 'n/a');

// ---------------------------------------------------------------------------------------------

interface LinearReport {
  readonly name: string;
  readonly oursFloat32: { wall: number; cpu: number; iterations: number; dual: number; primal: number; gap: number; kkt: number; converged: boolean };
  /** Float64Array rows (all passes on the doubles; the engine's preprocessed data are Float64Array) */
  readonly oursFloat64: { wall: number; cpu: number; iterations: number; dual: number };
  /** Float64Array rows, rowPrecision 'float32' (float32 working copy, checks on the doubles) */
  readonly oursFloat64Narrow: { wall: number; cpu: number; iterations: number; dual: number };
  readonly liblinear:
    | { installed: false }
    | {
        installed: true;
        processWall: number;
        processCpu: number;
        /** train() alone (LD_PRELOAD shim); NaN when the shim could not be built */
        trainWall: number;
        trainCpu: number;
        iterations: number;
        dual: number;
        primalOfItsW: number;
        /** ours / LIBLINEAR train(): wall and CPU */
        ratioWall: number;
        ratioCpu: number;
        /** ours / the whole liblinear-train process (includes its file parsing) */
        ratioToProcess: number;
        dualRelDiff: number;
        pass: boolean;
      };
  readonly warm: {
    flips: number;
    fromWall: number[];
    fromCpu: number[];
    fromIterations: number[];
    alphaOnlyWall: number;
    alphaOnlyIterations: number;
    coldOnFlippedWall: number;
    ratio: number;
    objectiveCheck: string;
    pass: boolean;
  };
}

async function linearBenchmark(): Promise<LinearReport> {
  console.log(`generating ${ROWS} × ${COLS} data (seed ${SEED}) …`);
  const data = makeData(ROWS, COLS, SEED);
  const p32: BinaryProblem = { X: { data: data.x32, rows: ROWS, cols: COLS }, y: data.y };
  const p64: BinaryProblem = { X: { data: data.x64, rows: ROWS, cols: COLS }, y: data.y };
  const bin = liblinearPath();
  const dir = mkdtempSync(join(tmpdir(), 'borderline-bench-engine-'));
  try {
    const file = join(dir, 'data.txt');
    if (bin) {
      console.log('writing the LIBLINEAR data file …');
      writeLiblinearFile(file, data, ROWS, COLS);
    }
    const ours32: Timed<BinarySolution>[] = [];
    const ours64: Timed<BinarySolution>[] = [];
    const ours64Narrow: Timed<BinarySolution>[] = [];
    const ll: (Timed<LiblinearRun> & LiblinearTimes)[] = [];
    const shim = bin ? buildShim(dir) : null;
    if (bin && !shim) console.log('gcc unavailable: LIBLINEAR train() cannot be timed apart from file parsing');
    for (let r = 0; r < REPEATS; r++) {
      console.log(`cold fits, round ${r + 1}/${REPEATS} …`);
      ours32.push(timeOurs(() => solveDcd(p32, OPTIONS)));
      ours64.push(timeOurs(() => solveDcd(p64, OPTIONS)));
      ours64Narrow.push(timeOurs(() => solveDcd(p64, { ...OPTIONS, rowPrecision: 'float32' })));
      if (bin) {
        ll.push(timeLiblinear(bin, ['-s', '3', '-B', '1', '-c', '1', '-e', '0.1'], file, join(dir, 'model.txt'), shim));
      }
    }
    const o32 = best(ours32);
    const o64 = best(ours64);
    const o64n = best(ours64Narrow);
    const cold = o32.value;

    // Warm refits after FLIPS label changes (a different random set each round).
    console.log('warm refits …');
    const g = xoroshiro128plus(SEED + 1);
    const fromWall: number[] = [];
    const fromCpu: number[] = [];
    const fromIterations: number[] = [];
    let lastFlipped: Int8Array = data.y;
    let lastFrom: BinarySolution = cold;
    for (let r = 0; r < WARM_ROUNDS; r++) {
      const y2 = Int8Array.from(data.y);
      for (let k = 0; k < FLIPS; k++) {
        const i = unsafeUniformIntDistribution(0, ROWS - 1, g);
        y2[i] = -y2[i];
      }
      const t = timeOurs(() => solveDcd({ X: p32.X, y: y2 }, { ...OPTIONS, warmStartFrom: { previous: cold, previousY: data.y } }));
      fromWall.push(t.wall);
      fromCpu.push(t.cpu);
      fromIterations.push(t.value.iterations);
      lastFlipped = y2;
      lastFrom = t.value;
    }
    const alphaOnly = timeOurs(() =>
      solveDcd({ X: p32.X, y: lastFlipped }, { ...OPTIONS, warmStart: dcdWarmStartAfterRelabel(cold.alpha, data.y, lastFlipped) }),
    );
    const coldFlipped = timeOurs(() => solveDcd({ X: p32.X, y: lastFlipped }, OPTIONS));
    const agree =
      Math.abs(lastFrom.primalObjective - coldFlipped.value.primalObjective) <=
      Math.max(lastFrom.dualityGap, coldFlipped.value.dualityGap);
    const objectiveCheck =
      `warm primal ${lastFrom.primalObjective.toFixed(3)} vs cold-on-flipped primal ${coldFlipped.value.primalObjective.toFixed(3)} ` +
      `(gaps ${lastFrom.dualityGap.toFixed(3)} / ${coldFlipped.value.dualityGap.toFixed(3)}): ${agree ? 'same optimum within the gaps' : 'DIFFERENT'}`;
    const medianFrom = [...fromWall].sort((a, b) => a - b)[Math.floor(fromWall.length / 2)];
    const warmRatio = medianFrom / o32.wall;

    let liblinear: LinearReport['liblinear'] = { installed: false };
    if (bin) {
      const l = ll[0];
      const trainWall = Math.min(...ll.map((r) => r.trainWall));
      const trainCpu = Math.min(...ll.map((r) => r.trainCpu));
      const processWall = Math.min(...ll.map((r) => r.processWall));
      const processCpu = Math.min(...ll.map((r) => r.processCpu));
      const dual = -l.value.objective;
      const reference = Number.isFinite(trainWall) ? trainWall : processWall;
      liblinear = {
        installed: true,
        processWall,
        processCpu,
        trainWall,
        trainCpu,
        iterations: l.value.iterations,
        dual,
        primalOfItsW: primalOf(p64, l.value.w, 1),
        ratioWall: o32.wall / trainWall,
        ratioCpu: o32.cpu / trainCpu,
        ratioToProcess: o32.wall / processWall,
        dualRelDiff: Math.abs(cold.dualObjective - dual) / Math.abs(dual),
        pass: o32.wall <= reference,
      };
    }
    return {
      name: `linear SVM (hinge) ${ROWS}×${COLS}, C=1, tol 0.1, best of ${REPEATS}`,
      oursFloat32: {
        wall: o32.wall,
        cpu: o32.cpu,
        iterations: cold.iterations,
        dual: cold.dualObjective,
        primal: cold.primalObjective,
        gap: cold.dualityGap,
        kkt: cold.maxKktViolation,
        converged: cold.converged,
      },
      oursFloat64: { wall: o64.wall, cpu: o64.cpu, iterations: o64.value.iterations, dual: o64.value.dualObjective },
      oursFloat64Narrow: { wall: o64n.wall, cpu: o64n.cpu, iterations: o64n.value.iterations, dual: o64n.value.dualObjective },
      liblinear,
      warm: {
        flips: FLIPS,
        fromWall,
        fromCpu,
        fromIterations,
        alphaOnlyWall: alphaOnly.wall,
        alphaOnlyIterations: alphaOnly.value.iterations,
        coldOnFlippedWall: coldFlipped.wall,
        ratio: warmRatio,
        objectiveCheck,
        pass: warmRatio <= 0.1 && agree,
      },
    };
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
}

function printLinear(r: LinearReport): void {
  console.log('');
  console.log(r.name);
  const o = r.oursFloat32;
  console.log(`  ours DCD, Float32 rows   wall ${fmt(o.wall)} s  cpu ${fmt(o.cpu)} s  outer iterations ${o.iterations}  converged ${o.converged}`);
  console.log(`                           dual ${fmt(o.dual, 4)}  primal ${fmt(o.primal, 4)}  gap ${fmt(o.gap, 4)}  max KKT violation ${fmt(o.kkt, 4)}`);
  const o64 = r.oursFloat64;
  console.log(`  ours DCD, Float64 rows   wall ${fmt(o64.wall)} s  cpu ${fmt(o64.cpu)} s  outer iterations ${o64.iterations}  dual ${fmt(o64.dual, 4)}`);
  const o64n = r.oursFloat64Narrow;
  console.log(`  ours DCD, Float64 rows   wall ${fmt(o64n.wall)} s  cpu ${fmt(o64n.cpu)} s  outer iterations ${o64n.iterations}  dual ${fmt(o64n.dual, 4)}  (rowPrecision 'float32')`);
  const l = r.liblinear;
  if (!l.installed) {
    console.log('  liblinear-train -s 3     not installed (apt-get install -y libsvm-tools liblinear-tools)');
  } else {
    console.log(`  liblinear-train -s 3 -B 1 -c 1 -e 0.1`);
    console.log(`                           train() wall ${fmt(l.trainWall)} s  cpu ${fmt(l.trainCpu)} s; whole process (with file parsing) wall ${fmt(l.processWall)} s  cpu ${fmt(l.processCpu)} s`);
    console.log(`                           iterations ${l.iterations}  dual ${fmt(l.dual, 4)} (printed objective negated)  primal of its w ${fmt(l.primalOfItsW, 4)}`);
    console.log(
      `  ratio ours/LIBLINEAR     ${fmt(l.ratioWall, 2)} wall, ${fmt(l.ratioCpu, 2)} CPU against train() (target ≤ 1.0): ${l.pass ? 'PASS' : 'FAIL'}; ` +
        `${fmt(l.ratioToProcess, 2)} against the whole process`,
    );
    console.log(`  dual objectives          relative difference ${l.dualRelDiff.toExponential(2)}`);
  }
  const w = r.warm;
  console.log(`  warm refit, ${w.flips} flips     warmStartFrom wall ${w.fromWall.map((t) => fmt(t)).join(' / ')} s (cpu ${w.fromCpu.map((t) => fmt(t)).join(' / ')} s), iterations ${w.fromIterations.join(' / ')}`);
  console.log(`                           median warm / best cold ${fmt(w.ratio)} (target ≤ 0.1): ${w.pass ? 'PASS' : 'FAIL'}`);
  console.log(`                           α-only warm start ${fmt(w.alphaOnlyWall)} s (${w.alphaOnlyIterations} iterations); cold fit on the flipped labels ${fmt(w.coldOnFlippedWall)} s`);
  console.log(`                           ${w.objectiveCheck}`);
}

interface RbfRowLike {
  readonly name: string;
  readonly oursSeconds: number;
  readonly libsvmSeconds: number;
  readonly ratio: number;
  readonly oursSupportVectors: number;
  readonly libsvmSupportVectors: number;
  readonly supportVectorDiffPercent: number;
  readonly pass: boolean;
}

async function rbfRows(): Promise<{ status: 'ok'; rows: RbfRowLike[] } | { status: string }> {
  if (!existsSync('/usr/bin/svm-train') && !existsSync('/usr/local/bin/svm-train')) return { status: 'not installed (apt-get install -y libsvm-tools liblinear-tools)' };
  let mod: { runRbfBenchmark?: (o?: object) => Promise<RbfRowLike[]> };
  try {
    mod = (await import('./rbf')) as typeof mod;
  } catch (e) {
    return { status: `missing (bench/rbf.ts could not be loaded: ${(e as Error).message})` };
  }
  if (typeof mod.runRbfBenchmark !== 'function') return { status: 'missing (bench/rbf.ts has no runRbfBenchmark)' };
  return { status: 'ok', rows: await mod.runRbfBenchmark() };
}

async function main(): Promise<void> {
  const linear = await linearBenchmark();
  printLinear(linear);
  console.log('');
  console.log('exact RBF fit (bench/rbf.ts) …');
  const rbf = await rbfRows();
  if (rbf.status === 'ok' && 'rows' in rbf) {
    for (const r of rbf.rows) {
      console.log(`  ${r.name}`);
      console.log(
        `  ours ${fmt(r.oursSeconds)} s, svm-train ${fmt(r.libsvmSeconds)} s, ratio ${fmt(r.ratio, 2)} (target ≤ 1.5); ` +
          `SVs ${r.oursSupportVectors} vs ${r.libsvmSupportVectors} (${fmt(r.supportVectorDiffPercent, 2)} %, target ≤ 1 %): ${r.pass ? 'PASS' : 'FAIL'}`,
      );
    }
  } else {
    console.log(`  RBF row: ${rbf.status}`);
  }
  mkdirSync(OUT_DIR, { recursive: true });
  const json = { generatedAt: new Date().toISOString(), node: process.version, linear, rbf };
  writeFileSync(join(OUT_DIR, 'engine.json'), JSON.stringify(json, (_k, v: unknown) => (v instanceof Float64Array ? Array.from(v) : v), 2));
  console.log(`\nwritten ${join(OUT_DIR, 'engine.json')}`);
}

main().catch((e: unknown) => {
  console.error(e);
  process.exitCode = 1;
});
