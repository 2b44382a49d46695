/**
 * How the refit service calls the margin engine. `workerEngine` runs every job in a worker thread,
 * so a server's event loop never runs a solver; `inlineEngine` runs on the calling thread (scripts
 * such as the demo seed, and tests that do not exercise threads).
 *
 * The worker speaks the protocol of lib/margin/worker.ts (see lib/margin/run-in-worker.ts, whose
 * logic this mirrors). It is started here rather than through `runInWorker` because the app's
 * server bundle must not contain run-in-worker.ts: its `new URL('./worker.ts', import.meta.url)` and
 * `createRequire(import.meta.url)` make the bundler trace the whole repository. Here the entry is a
 * path computed at run time from the working directory (the repository root for `next start`, the
 * scripts and the tests). Node 20 does not apply ESM loader hooks to a worker's entry module, so —
 * as run-in-worker.ts does — a .ts entry is started from a small CommonJS bootstrap that installs
 * tsx's require hook (resolved from that directory) and then requires the entry.
 */
import { createRequire } from 'node:module';
import { join } from 'node:path';
import { Worker } from 'node:worker_threads';
import { auditSamples, type AuditResult } from '../../margin/audit';
import { fitMargins, type EngineStage, type FitResult, type FitSettings, type LabelledData } from '../../margin/model';
import type { EngineJob, JobResult, WorkerMessage, WorkerProgress } from '../../margin/run-in-worker';
import { selectModel, type SelectionOptions, type SelectionResult } from '../../margin/select';
import { EngineInputError, FitCancelledError } from '../../margin/types';

export type EngineProgress = (p: WorkerProgress) => void;

export interface EngineRunner {
  readonly name: string;
  audit(data: LabelledData, settings: FitSettings, onProgress: EngineProgress, signal?: AbortSignal): Promise<AuditResult>;
  fit(data: LabelledData, settings: FitSettings, onProgress: EngineProgress, signal?: AbortSignal): Promise<FitResult>;
  select(data: LabelledData, settings: FitSettings, options: SelectionOptions, onProgress: EngineProgress, signal?: AbortSignal): Promise<SelectionResult>;
}

/** The engine's worker entry under the repository root. */
export function engineWorkerPath(root: string = process.cwd()): string {
  return join(root, 'lib', 'margin', 'worker.ts');
}

const CANCEL_GRACE_MS = 2000;

/** CommonJS source that loads a .ts worker entry through tsx's require hook. */
function tsBootstrap(entry: string): string {
  const hook = createRequire(join(process.cwd(), 'package.json')).resolve('tsx/cjs');
  return `require(${JSON.stringify(hook)});\nrequire(${JSON.stringify(entry)});\n`;
}

function rebuildError(name: string, message: string): Error {
  if (name === 'FitCancelledError') return new FitCancelledError();
  if (name === 'EngineInputError') return new EngineInputError(message);
  const e = new Error(message);
  e.name = name;
  return e;
}

/** Starts a worker thread on a .ts (through tsx's require hook) or .js entry. */
export function startTsWorker(entry: string, workerData: unknown): Worker {
  return entry.endsWith('.ts') ? new Worker(tsBootstrap(entry), { eval: true, workerData }) : new Worker(entry, { workerData });
}

/** Runs one engine job in a fresh worker thread (protocol of lib/margin/worker.ts). */
export function runJobInWorker<J extends EngineJob>(job: J, onProgress: EngineProgress, signal: AbortSignal | undefined, entry: string): Promise<JobResult<J>> {
  if (signal?.aborted) return Promise.reject(new FitCancelledError());
  const cancelFlag = new SharedArrayBuffer(4);
  const flag = new Int32Array(cancelFlag);
  const workerData = { job, cancelFlag, progressIntervalMs: 200 };
  const worker = startTsWorker(entry, workerData);
  return new Promise<JobResult<J>>((resolve, reject) => {
    let settled = false;
    let grace: NodeJS.Timeout | null = null;
    const finish = (fn: () => void) => {
      if (settled) return;
      settled = true;
      if (grace) clearTimeout(grace);
      signal?.removeEventListener('abort', onAbort);
      fn();
    };
    const onAbort = () => {
      Atomics.store(flag, 0, 1);
      worker.postMessage({ type: 'cancel' });
      grace = setTimeout(() => {
        void worker.terminate();
        finish(() => reject(new FitCancelledError()));
      }, CANCEL_GRACE_MS);
    };
    signal?.addEventListener('abort', onAbort, { once: true });
    worker.on('message', (m: WorkerMessage) => {
      if (m.type === 'progress') {
        if (!settled) onProgress(m.progress);
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

/** The refit service's own long-lived worker entry (fit-worker.ts). */
export function fitWorkerPath(root: string = process.cwd()): string {
  return join(root, 'lib', 'server', 'fits', 'fit-worker.ts');
}

const IDLE_MS = 120_000;

/**
 * An engine whose jobs run one at a time in one long-lived worker thread (fit-worker.ts): no thread
 * start per refit, results transferred instead of copied. The thread ends after two idle minutes
 * (and is started again on the next job); a cancelled job that does not stop within the grace
 * period terminates it.
 */
export function persistentWorkerEngine(entry: string = fitWorkerPath()): EngineRunner {
  let worker: Worker | null = null;
  let idle: NodeJS.Timeout | null = null;
  let nextId = 1;
  let chain: Promise<unknown> = Promise.resolve();
  const pending = new Map<number, { resolve: (v: unknown) => void; reject: (e: Error) => void; onProgress: EngineProgress }>();
  const drop = (w: Worker, error: Error) => {
    if (worker === w) worker = null;
    for (const p of pending.values()) p.reject(error);
    pending.clear();
  };
  const ensure = (): Worker => {
    if (idle) clearTimeout(idle);
    idle = null;
    if (worker) return worker;
    const w = startTsWorker(entry, {});
    w.on('message', (m: { type: 'progress'; id: number; progress: WorkerProgress } | { type: 'result'; id: number; result: unknown } | { type: 'error'; id: number; name: string; message: string }) => {
      const p = pending.get(m.id);
      if (!p) return;
      if (m.type === 'progress') p.onProgress(m.progress);
      else {
        pending.delete(m.id);
        if (m.type === 'result') p.resolve(m.result);
        else p.reject(rebuildError(m.name, m.message));
      }
    });
    w.on('error', (e) => drop(w, e));
    w.on('exit', (code) => drop(w, new Error(`engine worker exited with code ${code}`)));
    worker = w;
    return w;
  };
  const run = <J extends EngineJob>(job: J, onProgress: EngineProgress, signal: AbortSignal | undefined): Promise<JobResult<J>> => {
    const go = (): Promise<JobResult<J>> => {
      if (signal?.aborted) return Promise.reject(new FitCancelledError());
      const w = ensure();
      const id = nextId++;
      const cancelFlag = new SharedArrayBuffer(4);
      const flag = new Int32Array(cancelFlag);
      return new Promise<JobResult<J>>((resolve, reject) => {
        let grace: NodeJS.Timeout | null = null;
        const onAbort = () => {
          Atomics.store(flag, 0, 1);
          grace = setTimeout(() => {
            void w.terminate();
          }, CANCEL_GRACE_MS);
        };
        const settle = () => {
          if (grace) clearTimeout(grace);
          signal?.removeEventListener('abort', onAbort);
          idle = setTimeout(() => {
            if (worker && pending.size === 0) {
              void worker.terminate();
              worker = null;
            }
          }, IDLE_MS);
          idle.unref();
        };
        pending.set(id, {
          resolve: (v) => {
            settle();
            resolve(v as JobResult<J>);
          },
          reject: (e) => {
            settle();
            reject(signal?.aborted ? new FitCancelledError() : e);
          },
          onProgress,
        });
        signal?.addEventListener('abort', onAbort, { once: true });
        w.postMessage({ type: 'job', id, job, cancelFlag });
      });
    };
    const next = chain.then(go, go);
    chain = next.catch(() => undefined);
    return next;
  };
  return {
    name: 'persistent-worker-thread',
    audit: (data, settings, onProgress, signal) => run({ kind: 'audit', data, settings }, onProgress, signal),
    fit: (data, settings, onProgress, signal) => run({ kind: 'fit', data, settings }, onProgress, signal),
    select: (data, settings, options, onProgress, signal) => run({ kind: 'select', data, settings, options }, onProgress, signal),
  };
}

export function workerEngine(entry: string = engineWorkerPath()): EngineRunner {
  return {
    name: 'worker-thread',
    audit: (data, settings, onProgress, signal) => runJobInWorker({ kind: 'audit', data, settings }, onProgress, signal, entry),
    fit: (data, settings, onProgress, signal) => runJobInWorker({ kind: 'fit', data, settings }, onProgress, signal, entry),
    select: (data, settings, options, onProgress, signal) => runJobInWorker({ kind: 'select', data, settings, options }, onProgress, signal, entry),
  };
}

function inlineControl(onProgress: EngineProgress, signal?: AbortSignal) {
  let stage: EngineStage | null = null;
  return {
    signal,
    progressEvery: 1000,
    onStage: (s: EngineStage) => {
      stage = s;
      onProgress({ stage: s, iteration: null, violation: null });
    },
    onProgress: (p: { iteration: number; violation: number }) => onProgress({ stage, iteration: p.iteration, violation: p.violation }),
  };
}

async function inline<T>(signal: AbortSignal | undefined, fn: () => T): Promise<T> {
  if (signal?.aborted) throw new FitCancelledError();
  await Promise.resolve();
  return fn();
}

export const inlineEngine: EngineRunner = {
  name: 'inline',
  audit: (data, settings, onProgress, signal) => inline(signal, () => auditSamples(data, settings, inlineControl(onProgress, signal))),
  fit: (data, settings, onProgress, signal) => inline(signal, () => fitMargins(data, settings, inlineControl(onProgress, signal))),
  select: (data, settings, options, onProgress, signal) => inline(signal, () => selectModel(data, settings, options, inlineControl(onProgress, signal))),
};
