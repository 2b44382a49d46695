/**
 * The refit service on the PostgreSQL job system (BORDERLINE_JOBS=job-system, the default on
 * PostgreSQL). Two halves:
 *
 * - `JobSystemFitQueue` (app instances): the process-wide `FitJobQueue`; `enqueue` sends a pg-boss
 *   `refit` job keyed by project (a waiting job absorbs later requests). It never runs a fit.
 * - `startFitJobWorker` (`npm run worker` processes, any number, any machines): takes `refit` jobs
 *   and runs the same idempotent job body as the in-process queue (`processProject`, until the
 *   project has nothing queued), with a lease: the claimed fit records this worker and a heartbeat,
 *   and a fit whose heartbeat went stale (its worker was killed) is failed and run again by the
 *   next claim. A sweep re-sends jobs for projects with queued fits or stale running fits, so a
 *   lost message or a killed worker only delays work by one sweep. A follow-up full pass is
 *   cancelled when a newer revision is queued (the quick pass of the new revision runs first).
 */
import type PgBoss from 'pg-boss';
import type { Db } from '../db';
import { JOB_QUEUES, sendRefit, type RefitJobData } from '../jobs/boss';
import { wakeWorkersOnJob } from '../jobs/wake';
import type { EngineRunner } from './engine';
import { queueFirstFits } from './enqueue';
import type { FitJobQueue, FitRequest } from './jobs';
import { processProject, readSnapshot, type FitLease, type ProcessOutcome } from './run-fit';
import type { StandingsWriter } from './standings-writer';

export class JobSystemFitQueue implements FitJobQueue {
  readonly #db: Db;
  readonly #boss: PgBoss;

  constructor(db: Db, boss: PgBoss) {
    this.#db = db;
    this.#boss = boss;
  }

  async enqueue(request: FitRequest): Promise<void> {
    await sendRefit(this.#boss, { projectId: request.projectId, revisionNumber: request.revisionNumber });
  }

  async start(): Promise<void> {
    // The workers serve the queue; an app instance only sends.
  }

  async stop(): Promise<void> {
    await this.#boss.stop({ graceful: false, wait: true, close: true });
  }

  async idle(projectId?: string): Promise<void> {
    for (;;) {
      const pending = await this.#db.fit.count({ where: { status: { in: ['queued', 'running'] }, ...(projectId ? { projectId } : {}) } });
      if (pending === 0) return;
      await new Promise((r) => setTimeout(r, 100));
    }
  }
}

export interface FitJobWorkerOptions {
  readonly db: Db;
  readonly boss: PgBoss;
  /** One engine per refit job this process runs at once (each engine runs one job at a time). */
  readonly engines: readonly EngineRunner[];
  readonly lease: FitLease;
  /** how often the sweep re-sends jobs for waiting or orphaned fits (default 5 s) */
  readonly sweepMs?: number;
  /** how often a running follow-up pass checks for a newer revision (default 1 s) */
  readonly cancelCheckMs?: number;
  /** pg-boss polling interval in seconds (default 0.5, pg-boss's minimum) */
  readonly pollingIntervalSeconds?: number;
  /** the database URL to listen on for announced jobs (lib/server/jobs/wake.ts); without it, polling only */
  readonly wakeUrl?: string;
  readonly followUpQuietMs?: number;
  readonly quickPassCells?: number;
  readonly standingsWriter?: StandingsWriter;
  /** queue a first fit for projects that have none when starting (default true) */
  readonly bootstrap?: boolean;
  readonly log?: (line: string, fields?: Record<string, unknown>) => void;
  readonly onOutcome?: (projectId: string, outcome: ProcessOutcome) => void;
}

export interface FitJobWorker {
  /** Stops taking jobs, lets the fits in progress finish, and stops the sweep. */
  stop(): Promise<void>;
}

/** Registers this process as a refit worker on the job system. */
export async function startFitJobWorker(options: FitJobWorkerOptions): Promise<FitJobWorker> {
  const { db, boss } = options;
  const log = options.log ?? (() => {});
  if (options.bootstrap !== false) await queueFirstFits(db, (line) => log(line));
  const workIds: string[] = [];
  if (options.engines.length === 0) throw new Error('A refit worker needs at least one engine.');
  for (const engine of options.engines) {
    workIds.push(
      await boss.work<RefitJobData>(JOB_QUEUES.refit, { batchSize: 1, pollingIntervalSeconds: options.pollingIntervalSeconds ?? 0.5 }, async (jobs) => {
        for (const job of jobs) await runRefitJob(options, engine, job.data.projectId);
      }),
    );
  }
  const wake = options.wakeUrl ? wakeWorkersOnJob(options.wakeUrl, boss, JOB_QUEUES.refit, workIds, (line) => log(line)) : null;
  // Jobs sent from now on are announced to this worker (or, if the listener could not connect, found by polling).
  await wake?.ready;
  let sweeping: Promise<void> | null = null;
  const sweepTimer = setInterval(() => {
    sweeping ??= sweep(options).finally(() => {
      sweeping = null;
    });
  }, options.sweepMs ?? 5000);
  sweepTimer.unref?.();
  await sweep(options);
  return {
    async stop() {
      clearInterval(sweepTimer);
      await wake?.stop();
      if (sweeping) await sweeping;
      for (const id of workIds) await boss.offWork({ id });
    },
  };
}

/** One refit job: run the project's queued fits until none is left (the job body is idempotent). */
async function runRefitJob(options: FitJobWorkerOptions, engine: EngineRunner, projectId: string): Promise<void> {
  const log = options.log ?? (() => {});
  for (;;) {
    const controller = new AbortController();
    let watch: NodeJS.Timeout | null = null;
    let outcome: ProcessOutcome | null;
    try {
      outcome = await processProject(options.db, projectId, {
        engine,
        lease: options.lease,
        signal: controller.signal,
        followUpQuietMs: options.followUpQuietMs,
        quickPassCells: options.quickPassCells,
        standingsWriter: options.standingsWriter,
        log: (line) => log(line, { projectId }),
        onClaim: (fit) => {
          log('fit claimed', { projectId, fitId: fit.id, revision: fit.revisionNumber, followUp: fit.followUp });
          if (fit.followUp) watch = watchForNewerRevision(options, projectId, fit.revisionNumber, controller);
        },
      });
    } finally {
      if (watch) clearInterval(watch);
    }
    if (!outcome) return;
    log('fit finished', { projectId, fitId: outcome.fitId, revision: outcome.revisionNumber, status: outcome.status, pass: outcome.pass, ...(outcome.timings ?? {}) });
    options.onOutcome?.(projectId, outcome);
  }
}

/** A follow-up full pass gives way when a fit of the same or a newer revision is queued. */
function watchForNewerRevision(options: FitJobWorkerOptions, projectId: string, revisionNumber: number, controller: AbortController): NodeJS.Timeout {
  const timer = setInterval(() => {
    void options.db.fit
      .findMany({ where: { projectId, status: 'queued', revisionNumber: { gte: revisionNumber } }, select: { settings: true } })
      .then((queued) => {
        if (queued.some((f) => !readSnapshot(f.settings).followUp)) controller.abort();
      })
      .catch(() => {
        // The next check tries again.
      });
  }, options.cancelCheckMs ?? 1000);
  timer.unref?.();
  return timer;
}

/** Re-sends refit jobs for projects with queued fits or with running fits whose worker went silent. */
async function sweep(options: FitJobWorkerOptions): Promise<void> {
  const staleBefore = new Date(Date.now() - options.lease.staleMs);
  try {
    const rows = await options.db.fit.findMany({
      where: {
        OR: [
          { status: 'queued' },
          { status: 'running', heartbeatAt: { lt: staleBefore } },
          { status: 'running', heartbeatAt: null, startedAt: { lt: staleBefore } },
        ],
      },
      select: { projectId: true },
      distinct: ['projectId'],
    });
    for (const r of rows) await sendRefit(options.boss, { projectId: r.projectId });
  } catch (e) {
    options.log?.(`refit sweep failed: ${e instanceof Error ? e.message : String(e)}`);
  }
}
