/**
 * Waking workers when a job is sent. pg-boss workers poll their queue (every 0.5 s here, pg-boss's
 * shortest interval), so a job sent by an app instance waited 0–500 ms before a worker took it — a
 * visible part of the time from a closing vote to the refreshed queue. Senders therefore NOTIFY on
 * one channel with the queue's name after sending; each worker LISTENs on a connection of its own
 * and wakes its pg-boss workers of that queue at once (`notifyWorker`). Polling stays as it was:
 * it is how jobs are found, the notification only shortens the wait, so a notification lost (a
 * listener reconnecting, PostgreSQL restarting) costs at most one polling interval.
 */
import pg from 'pg';
import type PgBoss from 'pg-boss';
import type { JobQueueName } from './boss';

export const JOB_WAKE_CHANNEL = 'borderline_jobs';

/** Tells listening workers that a job was sent to `queue` (best effort, see the module comment). */
export async function announceJob(boss: PgBoss, queue: JobQueueName): Promise<void> {
  try {
    await boss.getDb().executeSql('SELECT pg_notify($1, $2)', [JOB_WAKE_CHANNEL, queue]);
  } catch {
    // The job is stored; the workers' polling finds it.
  }
}

export interface JobListener {
  /** Settles once the first connection attempt has ended: listening, or failed (then retrying). */
  readonly ready: Promise<void>;
  stop(): Promise<void>;
}

/**
 * Calls `onJob(queue)` for every announced job, over one dedicated connection that reconnects
 * (after `retryMs`) when it is lost.
 */
export function listenForJobs(connectionString: string, onJob: (queue: string) => void, options: { retryMs?: number; log?: (line: string) => void } = {}): JobListener {
  let stopped = false;
  let client: pg.Client | null = null;
  let retry: NodeJS.Timeout | null = null;
  let settleReady: () => void = () => {};
  const ready = new Promise<void>((resolve) => (settleReady = resolve));
  const connect = async (): Promise<void> => {
    if (stopped) return;
    const c = new pg.Client({ connectionString, application_name: 'borderline-wake' });
    const again = () => {
      if (client === c) client = null;
      c.removeAllListeners();
      c.on('error', () => undefined);
      void c.end().catch(() => undefined);
      if (!stopped && !retry) {
        retry = setTimeout(() => {
          retry = null;
          void connect();
        }, options.retryMs ?? 1000);
        retry.unref?.();
      }
    };
    c.on('notification', (n) => {
      if (n.channel === JOB_WAKE_CHANNEL && n.payload) onJob(n.payload);
    });
    c.on('error', again);
    c.on('end', again);
    try {
      await c.connect();
      await c.query(`LISTEN ${JOB_WAKE_CHANNEL}`);
      if (stopped) {
        await c.end();
        return;
      }
      client = c;
    } catch (e) {
      options.log?.(`job wake-up listener could not connect: ${e instanceof Error ? e.message : String(e)}`);
      again();
    } finally {
      settleReady();
    }
  };
  void connect();
  return {
    ready,
    async stop() {
      stopped = true;
      if (retry) clearTimeout(retry);
      const c = client;
      client = null;
      if (c) {
        c.removeAllListeners();
        c.on('error', () => undefined);
        await c.end().catch(() => undefined);
      }
    },
  };
}

/** Wakes the given pg-boss workers of `queue` whenever a job for it is announced. */
export function wakeWorkersOnJob(connectionString: string, boss: PgBoss, queue: JobQueueName, workIds: readonly string[], log?: (line: string) => void): JobListener {
  return listenForJobs(
    connectionString,
    (announced) => {
      if (announced !== queue) return;
      for (const id of workIds) boss.notifyWorker(id);
    },
    { log },
  );
}
