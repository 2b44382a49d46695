/**
 * The refit job interface.
 *
 * A refit request is a Fit row with status `queued`, tagged with the project, the revision it must
 * be computed for and the settings snapshot (created by `enqueueFitTx` in the same transaction as
 * the revision, or by lib/server/refit-request.ts). A `FitJobQueue` turns queued rows into finished
 * fits; every implementation runs the same idempotent job body (`processProject` in run-fit.ts):
 *
 * - coalescing: when a project has several queued fits, only the newest — highest revision, then
 *   latest request — is run; the others are marked `superseded` without running;
 * - one running fit per project: a project with a `running` fit is not started again;
 * - stale-result protection: a finished fit is written only if no fit of the same project with a
 *   newer (revision, request time) has completed; otherwise it is marked `superseded` and its
 *   standings are dropped — it never overwrites a newer result;
 * - results: standings in batches, metrics, the serialised model (warm start for the next fit),
 *   then the queue rebuild.
 *
 * Implementations:
 * - in-process (in-process.ts, the default and the embedded-database mode): a poll loop in the
 *   server process with an immediate `enqueue` nudge; the engine runs in a worker thread, so no
 *   request waits for a fit.
 * - the PostgreSQL job system (job-system.ts): `enqueue` sends a pg-boss job keyed by project (a
 *   waiting job absorbs later requests); `npm run worker` processes call `processProject` with a lease.
 */
import { log } from '../log';

export interface FitRequest {
  readonly projectId: string;
  readonly revisionNumber: number;
  /** The queued Fit row, when the caller created one. */
  readonly fitId?: string;
}

export interface FitJobQueue {
  /** A queued fit exists for the project: run it soon (idempotent; bursts coalesce). */
  enqueue(request: FitRequest): Promise<void>;
  /** Starts serving queued fits (including ones left from before a restart). */
  start(): Promise<void>;
  /** Stops taking new work and waits for the fits in progress to finish or cancel. */
  stop(): Promise<void>;
  /** Resolves once the project (or every project) has no queued or running fit in this queue. */
  idle(projectId?: string): Promise<void>;
}

const registry = globalThis as typeof globalThis & { __borderlineFitQueue?: FitJobQueue };

/** Installs the process-wide queue (the app's worker on start, tests with their own). */
export function setFitJobQueue(queue: FitJobQueue | null): void {
  registry.__borderlineFitQueue = queue ?? undefined;
}

export function currentFitJobQueue(): FitJobQueue | null {
  return registry.__borderlineFitQueue ?? null;
}

/**
 * Tells the process-wide queue (if one is running here) that a fit was queued. Safe to call from
 * anywhere after the transaction that created the Fit row committed; without a running queue the
 * row waits for the next worker start or poll.
 */
export async function notifyFitQueued(request: FitRequest): Promise<void> {
  const queue = currentFitJobQueue();
  if (!queue) return;
  try {
    await queue.enqueue(request);
  } catch (e) {
    // The Fit row is committed: a worker's sweep (or the in-process poll) still finds it.
    log.error('could not send the refit job', { component: 'refit', projectId: request.projectId, error: e instanceof Error ? e.message : String(e) });
  }
}
