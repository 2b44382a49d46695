/**
 * The PostgreSQL job system: pg-boss (https://github.com/timgit/pg-boss, MIT), version 10 — the
 * last line that runs on Node 20. pg-boss keeps its jobs in tables of its own schema (`pgboss`)
 * of the app's database, hands each job to exactly one worker (`SELECT … FOR UPDATE SKIP LOCKED`),
 * retries failed jobs, and fails jobs whose worker stopped answering after their expiry.
 *
 * Borderline's queues:
 *
 * - `refit`  (policy `short`, singleton key = project id): at most one *waiting* refit job per
 *   project, so a burst of revisions coalesces into one job; a job sent while the project's fit is
 *   running waits behind it. The job body (`processProject`) runs the newest queued Fit row and is
 *   idempotent; one running fit per project is enforced by the Fit rows themselves (see
 *   lib/server/fits/run-fit.ts, `claim`), not by the queue, so a busy project never blocks the
 *   queue for the others.
 * - `import` (policy `standard`): one job per staged import batch (lib/server/import/job.ts).
 *
 * Sending a job also announces it (NOTIFY, lib/server/jobs/wake.ts) so that a polling worker takes
 * it at once. App instances only send jobs (no maintenance, no polling); `npm run worker` processes run them
 * and pg-boss's maintenance (expiry, retries, archiving) — any number of them, on any machines.
 */
import PgBoss from 'pg-boss';
import { announceJob } from './wake';

export const JOB_QUEUES = { refit: 'refit', import: 'import' } as const;
export type JobQueueName = (typeof JOB_QUEUES)[keyof typeof JOB_QUEUES];

/** pg-boss keeps its tables in this schema of the app's database. */
export const JOB_SCHEMA = 'pgboss';

export interface JobSystemOptions {
  readonly connectionString: string;
  /** `app`: sends jobs only; `worker`: also runs pg-boss maintenance (expiry, retries, archive). */
  readonly role: 'app' | 'worker';
  /** Seconds before an active job whose worker went silent is failed and retried (default 3600). */
  readonly expireInSeconds?: number;
  /** Seconds between maintenance runs in workers (default 30). */
  readonly maintenanceIntervalSeconds?: number;
  /** Connections of pg-boss's own pool (default 4). */
  readonly poolSize?: number;
  readonly onError?: (error: Error) => void;
}

/** Queue settings: retries with backoff; the expiry is a backstop behind the fits' own leases. */
function queueDefinitions(expireInSeconds: number): PgBoss.Queue[] {
  return [
    { name: JOB_QUEUES.refit, policy: 'short', retryLimit: 10, retryDelay: 2, retryBackoff: true, expireInSeconds },
    { name: JOB_QUEUES.import, policy: 'standard', retryLimit: 3, retryDelay: 2, retryBackoff: true, expireInSeconds },
  ];
}

/** Starts pg-boss on the database (creating or upgrading its schema once) and its queues. */
export async function startJobSystem(options: JobSystemOptions): Promise<PgBoss> {
  const worker = options.role === 'worker';
  const expireInSeconds = options.expireInSeconds ?? 3600;
  const boss = new PgBoss({
    connectionString: options.connectionString,
    schema: JOB_SCHEMA,
    application_name: `borderline-${options.role}`,
    max: options.poolSize ?? 4,
    supervise: worker,
    schedule: false,
    migrate: true,
    maintenanceIntervalSeconds: options.maintenanceIntervalSeconds ?? 30,
    ...(worker ? { monitorStateIntervalSeconds: 60 } : {}),
  });
  boss.on('error', (error: Error) => options.onError?.(error));
  await boss.start();
  for (const queue of queueDefinitions(expireInSeconds)) {
    const existing = await boss.getQueue(queue.name);
    if (!existing) {
      try {
        await boss.createQueue(queue.name, queue);
      } catch (e) {
        // Another process created it between our check and our insert.
        if (!(await boss.getQueue(queue.name))) throw e;
      }
    } else if (existing.expireInSeconds !== queue.expireInSeconds || existing.retryLimit !== queue.retryLimit) {
      await boss.updateQueue(queue.name, queue);
    }
  }
  return boss;
}

export interface RefitJobData {
  readonly projectId: string;
  /** The revision the sender wanted fitted (information for the logs; the job runs the newest). */
  readonly revisionNumber?: number;
}

export interface ImportJobData {
  readonly batchId: string;
}

/** Sends a refit job for the project; null when one is already waiting (coalesced). */
export async function sendRefit(boss: PgBoss, data: RefitJobData, options: { startAfterSeconds?: number } = {}): Promise<string | null> {
  const id = await boss.send(JOB_QUEUES.refit, { ...data }, {
    singletonKey: data.projectId,
    ...(options.startAfterSeconds ? { startAfter: options.startAfterSeconds } : {}),
  });
  if (id !== null && !options.startAfterSeconds) await announceJob(boss, JOB_QUEUES.refit);
  return id;
}

/** Sends the job that applies a staged import batch. */
export async function sendImport(boss: PgBoss, data: ImportJobData): Promise<string | null> {
  const id = await boss.send(JOB_QUEUES.import, { ...data }, { singletonKey: data.batchId });
  if (id !== null) await announceJob(boss, JOB_QUEUES.import);
  return id;
}
