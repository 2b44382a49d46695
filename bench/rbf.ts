/**
 * Benchmark: exact RBF C-SVM fit (DESIGN.md §5) — our SMO solver against LIBSVM's svm-train on the same
 * deterministic 10,000 × 32 data in the same run. Target: time ratio ≤ 1.5, support-vector counts within 1 %.
 *
 *   npx tsx bench/rbf.ts
 *
 * `runRbfBenchmark()` is the reusable core (bench/engine.ts calls it).
 */
import { execFileSync } from 'node:child_process';
import { existsSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { pathToFileURL } from 'node:url';
import { unsafeUniformIntDistribution, xoroshiro128plus, type RandomGenerator } from 'pure-rand';
import { solveSmo } from '../lib/margin/smo';
import type { BinaryProblem } from '../lib/margin/types';

export interface BenchRow {
  readonly name: string;
  readonly rows: number;
  readonly cols: number;
  readonly oursSeconds: number;
  readonly libsvmSeconds: number;
  /** oursSeconds / libsvmSeconds (wall time; the DESIGN.md §5 figure). */
  readonly ratio: number;
  /** Process CPU time (user + system) of each side and their ratio. */
  readonly oursCpuSeconds: number;
  readonly libsvmCpuSeconds: number;
  readonly cpuRatio: number;
  readonly oursSupportVectors: number;
  readonly libsvmSupportVectors: number;
  /** |ours − LIBSVM| / LIBSVM support-vector count, in percent. */
  readonly supportVectorDiffPercent: number;
  readonly oursIterations: number;
  readonly libsvmIterations: number;
  /** Dual objective D(α) = Σα − ½αᵀQα (ours) and −obj printed by svm-train. */
  readonly oursDual: number;
  readonly libsvmDual: number;
  readonly targetRatio: number;
  readonly pass: boolean;
}

export interface RbfBenchOptions {
  readonly rows?: number;
  readonly cols?: number;
  readonly seed?: number;
  readonly cacheMiB?: number;
  /** Runs per side (interleaved); the fastest counts. Default 3. */
  readonly repeats?: number;
}

function gaussianSource(seed: number): () => number {
  const g: RandomGenerator = xoroshiro128plus(seed);
  const uniform = (): number => {
    const hi = unsafeUniformIntDistribution(0, (1 << 26) - 1, g);
    const lo = unsafeUniformIntDistribution(0, (1 << 27) - 1, g);
    return (hi * 134217728 + lo + 0.5) / 9007199254740992; // in (0, 1)
  };
  return () => Math.sqrt(-2 * Math.log(uniform())) * Math.cos(2 * Math.PI * uniform());
}

/**
 * Two overlapping Gaussian classes (means ±0.4 in the first 16 coordinates, unit covariance) with a
 * curved boundary: coordinates 0 and 1 are bent by the squares of 2 and 3, and 5 % of labels are flipped.
 */
export function makeRbfBenchData(rows: number, cols: number, seed: number): BinaryProblem {
  const gauss = gaussianSource(seed);
  const data = new Float64Array(rows * cols);
  const y = new Int8Array(rows);
  for (let i = 0; i < rows; i++) {
    const label = i % 2 === 0 ? 1 : -1;
    const o = i * cols;
    for (let k = 0; k < cols; k++) data[o + k] = gauss() + (k < 16 ? 0.4 * label : 0);
    if (cols >= 4) {
      data[o] += 0.5 * (data[o + 2] * data[o + 2] - 1);
      data[o + 1] -= 0.5 * (data[o + 3] * data[o + 3] - 1);
    }
    const u = gauss();
    y[i] = Math.abs(u) > 1.96 ? (-label as 1 | -1) : (label as 1 | -1);
  }
  return { X: { data, rows, cols }, y };
}

function writeLibsvmFile(path: string, p: BinaryProblem): void {
  const { rows, cols, data } = p.X;
  const lines: string[] = [];
  for (let i = 0; i < rows; i++) {
    const parts = [String(p.y[i])];
    for (let k = 0; k < cols; k++) if (data[i * cols + k] !== 0) parts.push(`${k + 1}:${String(data[i * cols + k])}`);
    lines.push(parts.join(' '));
  }
  writeFileSync(path, lines.join('\n') + '\n');
}

function svmTrainPath(): string {
  for (const p of ['/usr/bin/svm-train', '/usr/local/bin/svm-train']) if (existsSync(p)) return p;
  throw new Error('svm-train not found; install it with: apt-get install -y libsvm-tools liblinear-tools');
}

interface Timed {
  readonly wall: number;
  readonly cpu: number;
}

function parseBashTimes(text: string): number {
  // bash `times`: second line is "<user>m<s>s <sys>m<s>s" of the children.
  const lines = text.trim().split('\n');
  const m = /(\d+)m([\d.]+)s\s+(\d+)m([\d.]+)s/.exec(lines[lines.length - 1]);
  if (!m) throw new Error(`cannot parse bash times output: ${text}`);
  return Number(m[1]) * 60 + Number(m[2]) + Number(m[3]) * 60 + Number(m[4]);
}

/** One svm-train run: wall time, child CPU time (user + system, from bash `times`) and its figures. */
function timeLibsvm(dir: string, gamma: number, cacheMiB: number) {
  const file = join(dir, 'data.txt');
  const model = join(dir, 'model.txt');
  const log = join(dir, 'log.txt');
  const args = ['-s', '0', '-t', '2', '-g', String(gamma), '-c', '1', '-e', '0.001', '-m', String(cacheMiB), file, model];
  const t0 = process.hrtime.bigint();
  const times = execFileSync('bash', ['-c', '"$0" "$@" > "$LOG" && times', svmTrainPath(), ...args], {
    encoding: 'utf8',
    env: { ...process.env, LOG: log },
  });
  const wall = Number(process.hrtime.bigint() - t0) / 1e9;
  const out = readFileSync(log, 'utf8');
  const total = /total_sv (\d+)/.exec(readFileSync(model, 'utf8'));
  const iter = /#iter = (\d+)/.exec(out);
  const obj = /obj = (-?[\d.]+)/.exec(out);
  if (!total || !iter || !obj) throw new Error(`unexpected svm-train output:\n${out}`);
  return { time: { wall, cpu: parseBashTimes(times) }, sv: Number(total[1]), iterations: Number(iter[1]), dual: -Number(obj[1]) };
}

function timeOurs(problem: BinaryProblem, gamma: number, cacheMiB: number) {
  const c0 = process.cpuUsage();
  const t0 = process.hrtime.bigint();
  const sol = solveSmo(problem, { kernel: { type: 'rbf', gamma }, C: 1, tol: 1e-3, cacheBytes: cacheMiB * 1024 * 1024 });
  const wall = Number(process.hrtime.bigint() - t0) / 1e9;
  const c = process.cpuUsage(c0);
  let sv = 0;
  for (const a of sol.alpha) if (a > 0) sv++;
  return { time: { wall, cpu: (c.user + c.system) / 1e6 }, sv, iterations: sol.iterations, dual: sol.dualObjective };
}

function best(runs: readonly Timed[]): Timed {
  return { wall: Math.min(...runs.map((r) => r.wall)), cpu: Math.min(...runs.map((r) => r.cpu)) };
}

/**
 * Run the RBF benchmark and return its table rows. Each side runs `repeats` times, interleaved; the
 * fastest wall and CPU times of each side are compared (the machine may be shared).
 */
export async function runRbfBenchmark(options: RbfBenchOptions = {}): Promise<BenchRow[]> {
  const rows = options.rows ?? 10_000;
  const cols = options.cols ?? 32;
  const cacheMiB = options.cacheMiB ?? 64;
  const repeats = Math.max(1, options.repeats ?? 3);
  const gamma = 1 / cols;
  const problem = makeRbfBenchData(rows, cols, options.seed ?? 20240611);
  const dir = mkdtempSync(join(tmpdir(), 'borderline-bench-'));
  try {
    writeLibsvmFile(join(dir, 'data.txt'), problem);
    const refRuns: ReturnType<typeof timeLibsvm>[] = [];
    const ourRuns: ReturnType<typeof timeOurs>[] = [];
    for (let r = 0; r < repeats; r++) {
      refRuns.push(timeLibsvm(dir, gamma, cacheMiB));
      ourRuns.push(timeOurs(problem, gamma, cacheMiB));
    }
    const ref = refRuns[0];
    const ours = ourRuns[0];
    const refTime = best(refRuns.map((r) => r.time));
    const ourTime = best(ourRuns.map((r) => r.time));
    const ratio = ourTime.wall / refTime.wall;
    const svDiff = (100 * Math.abs(ours.sv - ref.sv)) / ref.sv;
    return [
      {
        name: `RBF C-SVM ${rows}×${cols}, γ=1/${cols}, C=1, tol 1e-3, cache ${cacheMiB} MiB, best of ${repeats}`,
        rows,
        cols,
        oursSeconds: ourTime.wall,
        libsvmSeconds: refTime.wall,
        ratio,
        oursCpuSeconds: ourTime.cpu,
        libsvmCpuSeconds: refTime.cpu,
        cpuRatio: ourTime.cpu / refTime.cpu,
        oursSupportVectors: ours.sv,
        libsvmSupportVectors: ref.sv,
        supportVectorDiffPercent: svDiff,
        oursIterations: ours.iterations,
        libsvmIterations: ref.iterations,
        oursDual: ours.dual,
        libsvmDual: ref.dual,
        targetRatio: 1.5,
        pass: ratio <= 1.5 && svDiff <= 1,
      },
    ];
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
}

function printTable(rowsOut: readonly BenchRow[]): void {
  for (const r of rowsOut) {
    console.log(r.name);
    console.log('                 ours        LIBSVM');
    console.log(`wall time (s) ${r.oursSeconds.toFixed(3).padStart(8)}    ${r.libsvmSeconds.toFixed(3).padStart(8)}   ratio ${r.ratio.toFixed(2)} (target ≤ ${r.targetRatio})`);
    console.log(`CPU time (s)  ${r.oursCpuSeconds.toFixed(3).padStart(8)}    ${r.libsvmCpuSeconds.toFixed(3).padStart(8)}   ratio ${r.cpuRatio.toFixed(2)}`);
    console.log(`support vec.  ${String(r.oursSupportVectors).padStart(8)}    ${String(r.libsvmSupportVectors).padStart(8)}   diff ${r.supportVectorDiffPercent.toFixed(2)} % (target ≤ 1 %)`);
    console.log(`iterations    ${String(r.oursIterations).padStart(8)}    ${String(r.libsvmIterations).padStart(8)}`);
    console.log(`dual obj.     ${r.oursDual.toFixed(4).padStart(8)}    ${r.libsvmDual.toFixed(4).padStart(8)}`);
    console.log(r.pass ? 'PASS' : 'FAIL');
  }
}

if (process.argv[1] && import.meta.url === pathToFileURL(process.argv[1]).href) {
  runRbfBenchmark().then(printTable, (e: unknown) => {
    console.error(e);
    process.exitCode = 1;
  });
}
