/**
 * The `npm run worker` process (job-system mode, PostgreSQL): applies pending migrations, starts
 * pg-boss in the worker role (it also runs pg-boss's maintenance: expiry, retries, archiving) and
 * registers the job handlers — refits (with pivots and out-of-fold runs, lib/server/fits) and
 * staged imports — then reads the feature matrices of recently fitted projects in the background
 * (lib/server/fits/warm.ts; `BORDERLINE_WORKER_WARM_HOURS`, default 24, 0 turns it off), so the
 * first refit after a restart is as quick as the later ones. Any number of these processes may
 * run against one database, on any machines.
 *
 * SIGTERM / SIGINT stop taking jobs, let the running ones finish (up to `BORDERLINE_WORKER_STOP_SECONDS`,
 * default 60 s; an unfinished fit is then picked up by another worker once its lease runs out) and
 * exit 0. Logs are JSON lines on stdout.
 */
import { randomUUID } from 'node:crypto';
import { hostname } from 'node:os';
import type PgBoss from 'pg-boss';
import { db as defaultDb } from '../db';
import { env } from '../env';
import { persistentWorkerEngine } from '../fits/engine';
import { startFitJobWorker, type FitJobWorker } from '../fits/job-system';
import { startImportJobWorker } from '../import/job';
import { workerStandingsWriter } from '../fits/standings-writer';
import { warmUpEngines, warmUpFeatureMatrices } from '../fits/warm';
import { startJobSystem } from '../jobs/boss';
import { log as rootLog } from '../log';
import { prepareDatabaseOrExit } from '../startup';

export type WorkerLog = (msg: string, fields?: Record<string, unknown>) => void;

export interface RunningWorker {
  readonly workerId: string;
  stop(): Promise<void>;
}

export async function startWorkerProcess(options: { log?: WorkerLog } = {}): Promise<RunningWorker> {
  const e = env();
  if (e.database.provider !== 'postgresql') {
    throw new Error('npm run worker needs a PostgreSQL DATABASE_URL: on the embedded database the app runs background work itself.');
  }
  if (e.jobs !== 'job-system') {
    throw new Error('npm run worker serves the job system, but BORDERLINE_JOBS=in-process keeps background work in the app.');
  }
  const workerId = `${hostname()}:${process.pid}:${randomUUID().slice(0, 8)}`;
  const logger = rootLog.child({ worker: workerId });
  const log: WorkerLog = options.log ?? ((msg, fields) => logger.info(msg, fields));
  await prepareDatabaseOrExit({ log: (line) => log(line) });
  const boss: PgBoss = await startJobSystem({
    connectionString: e.database.url,
    role: 'worker',
    expireInSeconds: Number(process.env.BORDERLINE_JOB_EXPIRE_SECONDS ?? 3600),
    maintenanceIntervalSeconds: Number(process.env.BORDERLINE_JOB_MAINTENANCE_SECONDS ?? 30),
    onError: (error) => logger.error('job system error', { error: error.message }),
  });
  const leaseMs = e.BORDERLINE_FIT_LEASE_SECONDS * 1000;
  const engines = Array.from({ length: e.BORDERLINE_WORKER_CONCURRENCY }, () => persistentWorkerEngine());
  const fits: FitJobWorker = await startFitJobWorker({
    db: defaultDb(),
    boss,
    engines,
    standingsWriter: workerStandingsWriter(e.database),
    lease: { workerId, heartbeatMs: Math.max(1000, Math.floor(leaseMs / 6)), staleMs: leaseMs },
    sweepMs: Math.max(1000, Math.floor(leaseMs / 3)),
    wakeUrl: e.database.url,
    log,
  });
  await startImportJobWorker({ db: defaultDb(), boss, workerId, lease: { heartbeatMs: Math.max(1000, Math.floor(leaseMs / 6)), staleMs: leaseMs }, wakeUrl: e.database.url, log });
  log('worker started', { concurrency: e.BORDERLINE_WORKER_CONCURRENCY, leaseSeconds: e.BORDERLINE_FIT_LEASE_SECONDS });
  // In the background: jobs are taken from now on; a refit of a project being read shares the read.
  const warmStart = performance.now();
  void warmUpEngines(engines)
    .then(() => warmUpFeatureMatrices(defaultDb(), { hours: e.BORDERLINE_WORKER_WARM_HOURS, log }))
    .then((w) => log('worker warm', { projects: w.projects.length, rows: w.rows, ms: Math.round(performance.now() - warmStart) }))
    .catch((error: unknown) => logger.warn('warm-up stopped', { error: error instanceof Error ? error.message : String(error) }));
  return {
    workerId,
    async stop() {
      log('worker stopping');
      await fits.stop();
      const timeout = Number(process.env.BORDERLINE_WORKER_STOP_SECONDS ?? 60) * 1000;
      await boss.stop({ graceful: true, wait: true, timeout });
      log('worker stopped');
    },
  };
}
