/**
 * The app instance's connection to the job system (job-system mode only): one pg-boss per process,
 * started on first use, sending jobs only (workers run them and pg-boss's maintenance).
 */
import type PgBoss from 'pg-boss';
import { env } from '../env';
import { log } from '../log';
import { startJobSystem } from './boss';

const holder = globalThis as typeof globalThis & { __borderlineAppBoss?: Promise<PgBoss> };

/** The process's sender; rejects when BORDERLINE_JOBS does not resolve to job-system. */
export function appJobSystem(): Promise<PgBoss> {
  const e = env();
  if (e.jobs !== 'job-system' || e.database.provider !== 'postgresql') {
    return Promise.reject(new Error('The job system is off: background work runs in this process (BORDERLINE_JOBS).'));
  }
  holder.__borderlineAppBoss ??= startJobSystem({
    connectionString: e.database.url,
    role: 'app',
    poolSize: 2,
    onError: (error) => log.error('job system error', { error: error.message }),
  }).catch((error: unknown) => {
    holder.__borderlineAppBoss = undefined;
    throw error;
  });
  return holder.__borderlineAppBoss;
}
