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

/** Runs one engine job in a fresh worker thread (protocol of lib/margin/worker.ts). */
export function runJobInWorker<J extends EngineJob>(job: J, onProgress: EngineProgress, signal: AbortSignal | undefined, entry: string): Promise<JobResult<J>> {
  if (signal?.aborted) return Promise.reject(new FitCancelledError());
  const cancelFlag = new SharedArrayBuffer(4);
  const flag = new Int32Array(cancelFlag);
  const workerData = { job, cancelFlag, progressIntervalMs: 200 };
  const worker = entry.endsWith('.ts') ? new Worker(tsBootstrap(entry), { eval: true, workerData }) : new Worker(entry, { workerData });
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
