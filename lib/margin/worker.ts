/**
 * Worker-thread entry for engine jobs (started by run-in-worker.ts; not imported by anything else).
 *
 * Protocol (structured clone):
 *   workerData: { job: EngineJob, cancelFlag: SharedArrayBuffer (Int32Array[1]) }
 *   → parent:   { type: 'progress', progress: WorkerProgress }
 *               { type: 'result', result }    (success; the worker then exits)
 *               { type: 'error', name, message }
 * Cancellation: a job runs synchronously, so this thread's message queue is not served while it
 * computes. The parent therefore sets a shared flag (Atomics); every solver progress callback and
 * every stage boundary reads it and aborts this thread's AbortController, which the solvers check
 * between iterations and which makes them throw FitCancelledError. A 'cancel' message is honoured too
 * when it arrives while the thread is idle.
 */
import { parentPort, workerData } from 'node:worker_threads';
import { auditSamples } from './audit';
import { fitMargins, type EngineStage } from './model';
import { selectModel } from './select';
import type { EngineJob, WorkerMessage, WorkerProgress } from './run-in-worker';
import type { SolverProgress } from './types';

interface WorkerInput {
  readonly job: EngineJob;
  readonly cancelFlag: SharedArrayBuffer;
  /** minimum milliseconds between posted progress messages */
  readonly progressIntervalMs: number;
}

function main(): void {
  const port = parentPort;
  if (!port) throw new Error('lib/margin/worker.ts must run in a worker thread');
  const { job, cancelFlag, progressIntervalMs } = workerData as WorkerInput;
  const flag = new Int32Array(cancelFlag);
  const controller = new AbortController();
  const poll = () => {
    if (!controller.signal.aborted && Atomics.load(flag, 0) !== 0) controller.abort();
  };
  port.on('message', (m: unknown) => {
    if (m && typeof m === 'object' && (m as { type?: unknown }).type === 'cancel') controller.abort();
  });

  let stage: EngineStage | null = null;
  let lastPost = 0;
  const post = (msg: WorkerMessage) => port.postMessage(msg);
  const progress = (p: WorkerProgress, force: boolean) => {
    const now = Date.now();
    if (force || now - lastPost >= progressIntervalMs) {
      lastPost = now;
      post({ type: 'progress', progress: p });
    }
  };
  const control = {
    signal: controller.signal,
    // SMO counts pair updates (microseconds each), DCD counts passes over the data.
    progressEvery: job.settings.solver === 'dcd' ? 1 : 200,
    onProgress: (p: SolverProgress) => {
      poll();
      progress({ stage, iteration: p.iteration, violation: p.violation }, false);
    },
    onStage: (s: EngineStage) => {
      poll();
      stage = s;
      progress({ stage: s, iteration: null, violation: null }, true);
    },
  };

  try {
    poll();
    let result: unknown;
    switch (job.kind) {
      case 'fit':
        result = fitMargins(job.data, job.settings, control);
        break;
      case 'audit':
        result = auditSamples(job.data, job.settings, control);
        break;
      case 'select':
        result = selectModel(job.data, job.settings, job.options ?? {}, control);
        break;
    }
    post({ type: 'result', result });
  } catch (e) {
    const err = e instanceof Error ? e : new Error(String(e));
    post({ type: 'error', name: err.name, message: err.message });
  } finally {
    port.close();
  }
}

main();
