/**
 * Run by worker.test.ts with plain `node --import tsx` (outside vitest): fits Iris in a worker
 * thread and prints a one-line JSON summary on stdout.
 */
import { runInWorker } from '../../lib/margin/run-in-worker';
import { loadIris } from './datasets';

const iris = loadIris();
const data = { ids: Array.from({ length: 150 }, (_, i) => `s${i}`), labels: Array.from(iris.labels, (k) => iris.classNames[k]), X: iris.X };
let progress = 0;
runInWorker(
  { kind: 'fit', data, settings: { kernel: { type: 'linear' }, C: 1, solver: 'smo', scale: 'standard', seed: 1, pivotCap: 0 } },
  { onProgress: () => progress++ },
).then(
  (r) => {
    process.stdout.write(JSON.stringify({ classes: r.classes, boundaries: r.boundaries.length, converged: r.boundaries.every((b) => b.solution.converged), progress }) + '\n');
  },
  (e: unknown) => {
    process.stderr.write(`worker failed: ${String(e)}\n`);
    process.exitCode = 1;
  },
);
