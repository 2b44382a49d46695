/**
 * The refit service's long-lived engine worker (started by engine.ts `persistentWorkerEngine`; not
 * imported by anything else). One job at a time; the thread stays up between jobs so a refit does
 * not pay for starting a thread and loading the engine, and results travel back with their typed
 * arrays transferred (moved, not copied).
 *
 * Protocol:
 *   ← { type: 'job', id, job: EngineJob, cancelFlag: SharedArrayBuffer (Int32Array[1]) }
 *   → { type: 'progress', id, progress: WorkerProgress }
 *   → { type: 'result', id, result }        (typed-array buffers in the transfer list)
 *   → { type: 'error', id, name, message }
 * Cancellation: the server sets the job's shared flag; the solvers' progress callbacks and every
 * stage boundary read it and abort the job's AbortController (as lib/margin/worker.ts does).
 */
import { parentPort } from 'node:worker_threads';
import { auditSamples } from '../../margin/audit';
import { fitMargins, type EngineStage } from '../../margin/model';
import type { EngineJob, WorkerProgress } from '../../margin/run-in-worker';
import { selectModel } from '../../margin/select';
import type { SolverProgress } from '../../margin/types';
import { lowerThreadPriority } from '../thread-priority';

const port = parentPort;
if (!port) throw new Error('lib/server/fits/fit-worker.ts must run in a worker thread');

/** Refits are background work: this thread runs at nice 10 (lib/server/thread-priority.ts). */
export const ENGINE_NICE = 10;
lowerThreadPriority(ENGINE_NICE);

/** Every distinct, transferable ArrayBuffer reachable from a result (SharedArrayBuffers stay shared). */
function buffersOf(value: unknown, out: Set<ArrayBuffer>, seen: Set<object>): void {
  if (value === null || typeof value !== 'object') return;
  if (seen.has(value)) return;
  seen.add(value);
  if (ArrayBuffer.isView(value)) {
    if (value.buffer instanceof ArrayBuffer && value.buffer.byteLength > 0) out.add(value.buffer);
    return;
  }
  if (Array.isArray(value)) {
    for (const v of value) buffersOf(v, out, seen);
    return;
  }
  for (const v of Object.values(value)) buffersOf(v, out, seen);
}

port.on('message', (m: { type: 'job'; id: number; job: EngineJob; cancelFlag: SharedArrayBuffer }) => {
  if (m.type !== 'job') return;
  const flag = new Int32Array(m.cancelFlag);
  const controller = new AbortController();
  const poll = () => {
    if (!controller.signal.aborted && Atomics.load(flag, 0) !== 0) controller.abort();
  };
  let stage: EngineStage | null = null;
  let lastPost = 0;
  const progress = (p: WorkerProgress, force: boolean) => {
    const now = Date.now();
    if (force || now - lastPost >= 200) {
      lastPost = now;
      port.postMessage({ type: 'progress', id: m.id, progress: p });
    }
  };
  const control = {
    signal: controller.signal,
    progressEvery: m.job.settings.solver === 'dcd' ? 1 : 200,
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
    const job = m.job;
    const result =
      job.kind === 'fit'
        ? fitMargins(job.data, job.settings, control)
        : job.kind === 'audit'
          ? auditSamples(job.data, job.settings, control)
          : selectModel(job.data, job.settings, job.options ?? {}, control);
    const transfer = new Set<ArrayBuffer>();
    buffersOf(result, transfer, new Set());
    port.postMessage({ type: 'result', id: m.id, result }, [...transfer]);
  } catch (e) {
    const err = e instanceof Error ? e : new Error(String(e));
    port.postMessage({ type: 'error', id: m.id, name: err.name, message: err.message });
  }
});
