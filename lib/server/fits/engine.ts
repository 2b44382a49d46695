/**
 * How the refit service calls the margin engine. `workerEngine` runs every job in a worker thread,
 * so a server's event loop never runs a solver; `inlineEngine` runs on the calling thread (scripts
 * such as the demo seed, and tests that do not exercise threads).
 *
 * Threads are started with the engine's worker client (lib/margin/worker-client.ts), which takes the
 * entry as a path: the app's server bundle must not contain run-in-worker.ts, whose
 * `new URL('./worker.ts', import.meta.url)` makes the bundler trace the whole repository. Here the
 * entry is computed at run time from the working directory (the repository root for `next start`,
 * the scripts and the tests).
 */
import { join } from 'node:path';
import { Worker } from 'node:worker_threads';
import { auditSamples, type AuditResult } from '../../margin/audit';
import { fitMargins, type EngineStage, type FitResult, type FitSettings, type LabelledData } from '../../margin/model';
import { rebuildError, runJobInWorker, startTsWorker, type EngineJob, type JobResult, type WorkerProgress } from '../../margin/worker-client';
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
const WORKER_TIMING = { progressIntervalMs: 200, cancelGraceMs: CANCEL_GRACE_MS } as const;

/** The refit service's own long-lived worker entry (fit-worker.ts). */
export function fitWorkerPath(root: string = process.cwd()): string {
  return join(root, 'lib', 'server', 'fits', 'fit-worker.ts');
}

/**
 * An engine thread with no job for this long is stopped (its heap returned). Starting one again
 * means a thread start and compiling the engine before the next refit, so the thread is kept
 * through the pauses of a working session.
 */
const IDLE_MS = 30 * 60_000;

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
    audit: (data, settings, onProgress, signal) => runJobInWorker({ kind: 'audit', data, settings }, { entry, onProgress, signal, ...WORKER_TIMING }),
    fit: (data, settings, onProgress, signal) => runJobInWorker({ kind: 'fit', data, settings }, { entry, onProgress, signal, ...WORKER_TIMING }),
    select: (data, settings, options, onProgress, signal) => runJobInWorker({ kind: 'select', data, settings, options }, { entry, onProgress, signal, ...WORKER_TIMING }),
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
