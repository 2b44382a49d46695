import { describe, expect, it } from 'vitest';
import { execFileSync } from 'node:child_process';
import { createRequire } from 'node:module';
import { tmpdir } from 'node:os';
import { fileURLToPath, pathToFileURL } from 'node:url';
import { runInWorker, type WorkerProgress } from '@/lib/margin/run-in-worker';
import { auditSamples } from '@/lib/margin/audit';
import { fitMargins, type FitSettings, type LabelledData } from '@/lib/margin/model';
import { createRng } from '@/lib/margin/random';
import { EngineInputError, FitCancelledError } from '@/lib/margin/types';
import { loadIris } from './datasets';

const iris = loadIris();
const data: LabelledData = { ids: Array.from({ length: 150 }, (_, i) => `s${i}`), labels: Array.from(iris.labels, (k) => iris.classNames[k]), X: iris.X };
const settings: FitSettings = { kernel: { type: 'linear' }, C: 1, solver: 'smo', scale: 'standard', seed: 1 };

/** Pure-noise labels on 3000 × 10 Gaussian-ish points: an RBF fit with a large C runs for a long time. */
function noisy(): LabelledData {
  const rng = createRng(99);
  const n = 3000;
  const d = 10;
  const X = new Float64Array(n * d);
  for (let k = 0; k < X.length; k++) X[k] = (rng.int(0, 1_000_000) - 500_000) / 250_000;
  return { ids: Array.from({ length: n }, (_, i) => `n${i}`), labels: Array.from({ length: n }, () => (rng.int(0, 1) ? 'p' : 'q')), X: { data: X, rows: n, cols: d } };
}
const longSettings: FitSettings = { kernel: { type: 'rbf', gamma: 2 }, C: 1e4, solver: 'smo', scale: 'none', seed: 1, tol: 1e-9, pivotCap: 0 };

describe('engine jobs in a worker thread', () => {
  it('a fit in the worker equals the same fit in-process, and progress arrives', async () => {
    const progress: WorkerProgress[] = [];
    const r = await runInWorker({ kind: 'fit', data, settings }, { onProgress: (p) => progress.push(p) });
    const local = fitMargins(data, settings);
    expect(r.classes).toEqual(local.classes);
    r.boundaries.forEach((b, k) => {
      expect(Array.from(b.solution.alpha)).toEqual(Array.from(local.boundaries[k].solution.alpha));
      expect(b.solution.b).toBe(local.boundaries[k].solution.b);
    });
    expect(r.samples.flags).toEqual(local.samples.flags);
    // a stage message for each of the three one-vs-rest boundaries
    expect(progress.filter((p) => p.stage?.stage === 'fit' && p.iteration === null).map((p) => p.stage?.step)).toEqual([1, 2, 3]);
  });

  it('an audit in the worker equals the in-process audit', async () => {
    const r = await runInWorker({ kind: 'audit', data, settings: { ...settings, folds: 3 } });
    expect(r.ranking).toEqual(auditSamples(data, { ...settings, folds: 3 }).ranking);
  });

  it('engine input errors come back as EngineInputError with the message', async () => {
    await expect(runInWorker({ kind: 'fit', data, settings: { ...settings, solver: 'dcd', kernel: { type: 'rbf', gamma: 1 } } })).rejects.toThrow(
      new EngineInputError('solver dcd solves the linear kernel only; use solver smo for the rbf kernel'),
    );
  });

  it('cancel stops a long fit cooperatively, and the event loop keeps running meanwhile', async () => {
    let ticks = 0;
    const timer = setInterval(() => ticks++, 5);
    const controller = new AbortController();
    const ticksAtProgress: number[] = [];
    let settled = false;
    const job = runInWorker(
      { kind: 'fit', data: noisy(), settings: longSettings },
      {
        signal: controller.signal,
        progressIntervalMs: 10,
        // A grace period far beyond the test timeout: only the cooperative path (shared flag →
        // AbortController in the worker → FitCancelledError) can settle the promise in time.
        cancelGraceMs: 10 * 60_000,
        onProgress: (p) => {
          if (p.iteration === null) return;
          ticksAtProgress.push(ticks);
          if (ticksAtProgress.length === 8) controller.abort();
        },
      },
    ).finally(() => (settled = true));
    await expect(job).rejects.toBeInstanceOf(FitCancelledError);
    clearInterval(timer);
    expect(settled).toBe(true);
    // The interval callback ran between solver progress messages, i.e. while the worker was computing.
    expect(ticksAtProgress.length).toBeGreaterThanOrEqual(8);
    expect(ticksAtProgress[7]).toBeGreaterThan(ticksAtProgress[0]);
  });

  it('terminates the worker when it does not stop within the grace period', async () => {
    const controller = new AbortController();
    const job = runInWorker(
      { kind: 'fit', data: noisy(), settings: longSettings },
      { signal: controller.signal, cancelGraceMs: 0, onProgress: (p) => p.iteration !== null && controller.abort() },
    );
    await expect(job).rejects.toBeInstanceOf(FitCancelledError);
  });

  it('an already aborted signal rejects without starting', async () => {
    const controller = new AbortController();
    controller.abort();
    await expect(runInWorker({ kind: 'fit', data, settings }, { signal: controller.signal })).rejects.toBeInstanceOf(FitCancelledError);
  });

  it('works from plain `node --import tsx` outside vitest, from another working directory', () => {
    const require = createRequire(import.meta.url);
    const tsx = pathToFileURL(require.resolve('tsx')).href;
    const script = fileURLToPath(new URL('./worker-script.ts', import.meta.url));
    const out = execFileSync(process.execPath, ['--import', tsx, script], { cwd: tmpdir(), encoding: 'utf8', timeout: 60_000 });
    const summary = JSON.parse(out.trim()) as { classes: string[]; boundaries: number; converged: boolean; progress: number };
    expect(summary.classes).toEqual(['setosa', 'versicolor', 'virginica']);
    expect(summary.boundaries).toBe(3);
    expect(summary.converged).toBe(true);
    expect(summary.progress).toBeGreaterThan(0);
  });
});
