/**
 * Runs an engine job (fit, audit, model selection) in a node:worker_threads Worker, so that the
 * calling thread — a server's event loop — is never blocked by a solver.
 *
 *   const result = await runInWorker({ kind: 'fit', data, settings }, { onProgress, signal });
 *
 * - The job and the result cross the thread boundary by structured clone (the engine's results are
 *   plain objects and typed arrays).
 * - Progress: stage changes (fit / pivots / fold / grid, with step and total) are always posted;
 *   solver iterations at most every `progressIntervalMs` (default 100 ms).
 * - Cancellation: aborting `signal` sets a flag shared with the worker (SharedArrayBuffer + Atomics);
 *   the worker's solver polls it in its progress callback and stops through its own AbortController,
 *   and the promise rejects with FitCancelledError. If the worker has not stopped after
 *   `cancelGraceMs` (default 2000 ms) it is terminated, and the promise rejects the same way.
 * - The worker entry is worker.ts; a .ts entry is loaded through tsx's require hook (see
 *   `tsBootstrap`). Pass `workerUrl` to use a compiled JavaScript entry instead.
 * - Errors thrown in the worker are re-created as EngineInputError / FitCancelledError when they were
 *   of those classes, otherwise as Error with the original name and message.
 */
import { Worker } from 'node:worker_threads';
import { createRequire } from 'node:module';
import { fileURLToPath } from 'node:url';
import type { AuditResult } from './audit';
import type { EngineStage, FitResult, FitSettings, LabelledData } from './model';
import type { SelectionOptions, SelectionResult } from './select';
import { EngineInputError, FitCancelledError } from './types';

export type EngineJob =
  | { readonly kind: 'fit'; readonly data: LabelledData; readonly settings: FitSettings }
  | { readonly kind: 'audit'; readonly data: LabelledData; readonly settings: FitSettings }
  | { readonly kind: 'select'; readonly data: LabelledData; readonly settings: FitSettings; readonly options?: SelectionOptions };

export type JobResult<J extends EngineJob> = J extends { kind: 'fit' }
  ? FitResult
  : J extends { kind: 'audit' }
    ? AuditResult
    : SelectionResult;

export interface WorkerProgress {
  /** current stage of the job (null before the first stage) */
  readonly stage: EngineStage | null;
  /** solver iteration within the current stage (null on a stage change) */
  readonly iteration: number | null;
  readonly violation: number | null;
}

export type WorkerMessage =
  | { readonly type: 'progress'; readonly progress: WorkerProgress }
  | { readonly type: 'result'; readonly result: unknown }
  | { readonly type: 'error'; readonly name: string; readonly message: string };

export interface RunInWorkerOptions {
  readonly onProgress?: (p: WorkerProgress) => void;
  readonly signal?: AbortSignal;
  readonly progressIntervalMs?: number;
  readonly cancelGraceMs?: number;
  /** worker entry (default: worker.ts next to this file) */
  readonly workerUrl?: URL;
}

/**
 * Bootstrap source for a worker whose entry is a .ts file. Node 20 does not apply ESM loader hooks
 * (`--import tsx` in execArgv, or module.register inside the worker) to a worker's entry module, so
 * the entry is loaded through tsx's CommonJS require hook instead, resolved to an absolute path so
 * that any working directory works.
 */
function tsBootstrap(entry: URL): string {
  const require = createRequire(import.meta.url);
  const hook = require.resolve('tsx/cjs');
  return `require(${JSON.stringify(hook)});\nrequire(${JSON.stringify(fileURLToPath(entry))});\n`;
}

function rebuildError(name: string, message: string): Error {
  if (name === 'FitCancelledError') return new FitCancelledError();
  if (name === 'EngineInputError') return new EngineInputError(message);
  const e = new Error(message);
  e.name = name;
  return e;
}

export function runInWorker<J extends EngineJob>(job: J, options: RunInWorkerOptions = {}): Promise<JobResult<J>> {
  const url = options.workerUrl ?? new URL('./worker.ts', import.meta.url);
  const cancelFlag = new SharedArrayBuffer(4);
  const flag = new Int32Array(cancelFlag);
  if (options.signal?.aborted) return Promise.reject(new FitCancelledError());
  const workerData = { job, cancelFlag, progressIntervalMs: options.progressIntervalMs ?? 100 };
  const worker = url.pathname.endsWith('.ts') ? new Worker(tsBootstrap(url), { eval: true, workerData }) : new Worker(url, { workerData });
  return new Promise<JobResult<J>>((resolve, reject) => {
    let settled = false;
    let graceTimer: NodeJS.Timeout | null = null;
    const finish = (fn: () => void) => {
      if (settled) return;
      settled = true;
      if (graceTimer) clearTimeout(graceTimer);
      options.signal?.removeEventListener('abort', onAbort);
      fn();
    };
    const onAbort = () => {
      Atomics.store(flag, 0, 1);
      worker.postMessage({ type: 'cancel' });
      graceTimer = setTimeout(() => {
        void worker.terminate();
        finish(() => reject(new FitCancelledError()));
      }, options.cancelGraceMs ?? 2000);
    };
    options.signal?.addEventListener('abort', onAbort, { once: true });
    worker.on('message', (m: WorkerMessage) => {
      if (m.type === 'progress') {
        if (!settled) options.onProgress?.(m.progress);
      } else if (m.type === 'result') {
        finish(() => resolve(m.result as JobResult<J>));
      } else {
        finish(() => reject(rebuildError(m.name, m.message)));
      }
    });
    worker.on('error', (e) => finish(() => reject(e)));
    worker.on('exit', (code) => finish(() => reject(new Error(`engine worker exited with code ${code} before returning a result`))));
  });
}
