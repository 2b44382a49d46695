/**
 * Starting an engine worker thread and talking to it (protocol of worker.ts), without any
 * module-relative URL: callers pass the entry as an absolute path. The Next.js server bundle
 * imports this module (lib/server/fits), so it must not contain `new URL(..., import.meta.url)` or
 * `createRequire(import.meta.url)`, which make the bundler trace the whole repository;
 * run-in-worker.ts adds the default entry next to it for scripts, the CLI and tests.
 *
 * A .ts entry is loaded through tsx's CommonJS require hook: Node 20 does not apply ESM loader
 * hooks (`--import tsx` in execArgv, or module.register inside the worker) to a worker's entry
 * module. The hook is resolved from the entry's own folder, so any working directory works.
 *
 * Cancellation: aborting `signal` sets a flag shared with the worker (SharedArrayBuffer + Atomics);
 * the worker's solver polls it in its progress callback and stops through its own AbortController,
 * and the promise rejects with FitCancelledError. If the worker has not stopped after
 * `cancelGraceMs` it is terminated, and the promise rejects the same way. Errors thrown in the
 * worker are re-created as EngineInputError / FitCancelledError when they were of those classes,
 * otherwise as Error with the original name and message.
 */
import { createRequire } from 'node:module';
import { Worker } from 'node:worker_threads';
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

/** Bootstrap source that installs tsx's require hook, then requires the .ts entry. */
function tsBootstrap(entry: string): string {
  const hook = createRequire(entry).resolve('tsx/cjs');
  return `require(${JSON.stringify(hook)});\nrequire(${JSON.stringify(entry)});\n`;
}

/** Starts a worker thread on `entry` (absolute path; .ts through tsx, .js/.mjs directly). */
export function startTsWorker(entry: string, workerData: unknown): Worker {
  return entry.endsWith('.ts') ? new Worker(tsBootstrap(entry), { eval: true, workerData }) : new Worker(entry, { workerData });
}

/** Re-creates an error posted by a worker as the engine's own error class where it was one. */
export function rebuildError(name: string, message: string): Error {
  if (name === 'FitCancelledError') return new FitCancelledError();
  if (name === 'EngineInputError') return new EngineInputError(message);
  const e = new Error(message);
  e.name = name;
  return e;
}

export interface JobInWorkerOptions {
  /** absolute path of the worker entry (worker.ts or a compiled equivalent) */
  readonly entry: string;
  readonly onProgress?: (p: WorkerProgress) => void;
  readonly signal?: AbortSignal;
  /** solver iterations are reported at most this often (ms) */
  readonly progressIntervalMs: number;
  readonly cancelGraceMs: number;
}

/** Runs one engine job in a fresh worker thread and settles with its result. */
export function runJobInWorker<J extends EngineJob>(job: J, options: JobInWorkerOptions): Promise<JobResult<J>> {
  if (options.signal?.aborted) return Promise.reject(new FitCancelledError());
  const cancelFlag = new SharedArrayBuffer(4);
  const flag = new Int32Array(cancelFlag);
  const worker = startTsWorker(options.entry, { job, cancelFlag, progressIntervalMs: options.progressIntervalMs });
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
      }, options.cancelGraceMs);
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
