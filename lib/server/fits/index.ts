/**
 * The refit service's public surface.
 *
 *   ensureFitWorker()            starts the process-wide in-process worker once (idempotent); the
 *                                app calls it on start-up (instrumentation) and lazily from the
 *                                queue's pages, actions and routes
 *   runInitialFit(projectId, db) for scripts (the demo seed): makes sure the project's current
 *                                revision has a fit, runs the queued fits on the calling thread and
 *                                returns when the project has a completed fit and a queue
 *   notifyFitQueued(request)     after committing a queued Fit row
 */
import { db as defaultDb, type Db } from '../db';
import { env, type DatabaseConfig } from '../env';
import { log } from '../log';
import { workerStandingsWriter } from './standings-writer';
import { writeTx } from '../queue/tx';
import { enqueueCurrentRevisionTx } from './enqueue';
import { inlineEngine, persistentWorkerEngine, type EngineRunner } from './engine';
import { InProcessFitQueue } from './in-process';
import { warmUpEngines } from './warm';
import { JobSystemFitQueue } from './job-system';
import { appJobSystem } from '../jobs/app';
import { currentFitJobQueue, setFitJobQueue, type FitJobQueue } from './jobs';
import { processProject, type ProcessOutcome } from './run-fit';

export { notifyFitQueued, currentFitJobQueue, setFitJobQueue, type FitJobQueue, type FitRequest } from './jobs';
export { enqueueFitTx, enqueueCurrentRevisionTx } from './enqueue';
export { processProject, type ProcessOutcome } from './run-fit';
export { InProcessFitQueue } from './in-process';
export { JobSystemFitQueue, startFitJobWorker, type FitJobWorker, type FitJobWorkerOptions } from './job-system';
export { inlineEngine, persistentWorkerEngine, workerEngine, type EngineRunner } from './engine';

const refitLog = log.child({ component: 'refit' });

const holder = globalThis as typeof globalThis & { __borderlineFitWorkerStart?: Promise<FitJobQueue> };

/**
 * Starts the in-process fit worker of this server process (once). With no arguments it serves the
 * app's database (DATABASE_URL) and stores standings through a writer thread of its own; pass a
 * client (and its configuration, to keep the writer thread) to serve another database.
 */
export function ensureFitWorker(client?: Db, config?: DatabaseConfig): Promise<FitJobQueue> {
  const existing = currentFitJobQueue();
  if (existing && holder.__borderlineFitWorkerStart) return holder.__borderlineFitWorkerStart;
  if (existing) return Promise.resolve(existing);
  if (client === undefined && env().jobs === 'job-system') return holder.__borderlineFitWorkerStart ?? ensureJobSystemQueue();
  const target = client ?? defaultDb();
  const writerConfig = config ?? (client === undefined ? env().database : undefined);
  const engine = persistentWorkerEngine();
  const queue = new InProcessFitQueue(target, {
    engine,
    ...(writerConfig ? { standingsWriter: workerStandingsWriter(writerConfig) } : {}),
    bootstrap: true,
    log: (line) => refitLog.info(line),
  });
  setFitJobQueue(queue);
  holder.__borderlineFitWorkerStart = queue.start().then(
    () => {
      // The app's own worker: start the engine thread and compile the solver before the first refit.
      if (client === undefined) void warmUpEngines([engine]).catch((e: unknown) => refitLog.warn('engine warm-up failed', { error: e instanceof Error ? e.message : String(e) }));
      return queue;
    },
    (e: unknown) => {
      refitLog.error('the fit worker could not start', { error: e instanceof Error ? e.message : String(e) });
      setFitJobQueue(null);
      holder.__borderlineFitWorkerStart = undefined;
      throw e;
    },
  );
  return holder.__borderlineFitWorkerStart;
}

/** Job-system mode: this app instance sends refit jobs; `npm run worker` processes run them. */
function ensureJobSystemQueue(): Promise<FitJobQueue> {
  holder.__borderlineFitWorkerStart = appJobSystem().then(
    (boss) => {
      const queue = new JobSystemFitQueue(defaultDb(), boss);
      setFitJobQueue(queue);
      return queue;
    },
    (e: unknown) => {
      refitLog.error('could not reach the job system', { error: e instanceof Error ? e.message : String(e) });
      holder.__borderlineFitWorkerStart = undefined;
      throw e;
    },
  );
  return holder.__borderlineFitWorkerStart;
}

/**
 * For the demo seed and other scripts: queues a fit of the current revision if the project has no
 * fit yet, then runs every queued fit of the project on this thread (no worker thread needed in a
 * script). Resolves with the last outcome; the project then has a completed fit and a queue.
 */
export async function runInitialFit(projectId: string, client: Db = defaultDb(), engine: EngineRunner = inlineEngine): Promise<ProcessOutcome | null> {
  const existing = await client.fit.count({ where: { projectId, status: { in: ['queued', 'running', 'done'] } } });
  if (existing === 0) {
    await writeTx(client, [{ table: 'Project', id: projectId }], (tx) => enqueueCurrentRevisionTx(tx, projectId));
  }
  // A 'running' fit left by an interrupted script run would block the project: start it over.
  await client.fit.updateMany({ where: { projectId, status: 'running' }, data: { status: 'queued', progress: 0 } });
  let last: ProcessOutcome | null = null;
  for (;;) {
    const outcome = await processProject(client, projectId, { engine, followUp: false, log: (line) => refitLog.info(line) });
    if (!outcome) return last;
    last = outcome;
  }
}
