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
 * - Cancellation (grace `cancelGraceMs`, default 2000 ms), error re-creation and the .ts bootstrap
 *   are those of worker-client.ts; this module adds the default entry, worker.ts next to it. Pass
 *   `workerUrl` to use a compiled JavaScript entry instead.
 */
import { fileURLToPath } from 'node:url';
import { runJobInWorker, type EngineJob, type JobResult, type WorkerProgress } from './worker-client';

export type { EngineJob, JobResult, WorkerMessage, WorkerProgress } from './worker-client';

export interface RunInWorkerOptions {
  readonly onProgress?: (p: WorkerProgress) => void;
  readonly signal?: AbortSignal;
  readonly progressIntervalMs?: number;
  readonly cancelGraceMs?: number;
  /** worker entry (default: worker.ts next to this file) */
  readonly workerUrl?: URL;
}

export function runInWorker<J extends EngineJob>(job: J, options: RunInWorkerOptions = {}): Promise<JobResult<J>> {
  const url = options.workerUrl ?? new URL('./worker.ts', import.meta.url);
  return runJobInWorker(job, {
    entry: fileURLToPath(url),
    onProgress: options.onProgress,
    signal: options.signal,
    progressIntervalMs: options.progressIntervalMs ?? 100,
    cancelGraceMs: options.cancelGraceMs ?? 2000,
  });
}
