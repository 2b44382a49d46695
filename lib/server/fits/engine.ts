/**
 * How the refit service calls the margin engine. `workerEngine` runs every job in a worker thread
 * (lib/margin/run-in-worker.ts), so a server's event loop never runs a solver; `inlineEngine` runs
 * on the calling thread (scripts such as the demo seed, and tests that do not exercise threads).
 */
import { resolve } from 'node:path';
import { pathToFileURL } from 'node:url';
import { auditSamples, type AuditResult } from '../../margin/audit';
import { fitMargins, type EngineStage, type FitResult, type FitSettings, type LabelledData } from '../../margin/model';
import { runInWorker, type WorkerProgress } from '../../margin/run-in-worker';
import { selectModel, type SelectionOptions, type SelectionResult } from '../../margin/select';
import { FitCancelledError } from '../../margin/types';

export type EngineProgress = (p: WorkerProgress) => void;

export interface EngineRunner {
  readonly name: string;
  audit(data: LabelledData, settings: FitSettings, onProgress: EngineProgress, signal?: AbortSignal): Promise<AuditResult>;
  fit(data: LabelledData, settings: FitSettings, onProgress: EngineProgress, signal?: AbortSignal): Promise<FitResult>;
  select(data: LabelledData, settings: FitSettings, options: SelectionOptions, onProgress: EngineProgress, signal?: AbortSignal): Promise<SelectionResult>;
}

/**
 * The engine's worker entry, resolved from the repository root (the working directory of the app,
 * the scripts and the tests) rather than from this module's URL, which a bundler may rewrite.
 */
export function engineWorkerUrl(): URL {
  return pathToFileURL(resolve(process.cwd(), 'lib/margin/worker.ts'));
}

export function workerEngine(workerUrl: URL = engineWorkerUrl()): EngineRunner {
  return {
    name: 'worker-thread',
    audit: (data, settings, onProgress, signal) => runInWorker({ kind: 'audit', data, settings }, { onProgress, signal, workerUrl, progressIntervalMs: 200 }),
    fit: (data, settings, onProgress, signal) => runInWorker({ kind: 'fit', data, settings }, { onProgress, signal, workerUrl, progressIntervalMs: 200 }),
    select: (data, settings, options, onProgress, signal) =>
      runInWorker({ kind: 'select', data, settings, options }, { onProgress, signal, workerUrl, progressIntervalMs: 200 }),
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
