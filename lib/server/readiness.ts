// Readiness: may a load balancer send this instance requests? (Liveness — "the process is up" —
// is /api/health and reads nothing; a failing readiness check should take the instance out of
// rotation, not restart it.)
//
// Ready when, within READY_TIMEOUT_MS, the database answers a trivial query through the app's
// own client (so a broken connection pool shows here too) and every migration in
// prisma/migrations/<provider> is recorded as applied with the same checksum. A migration the
// database has but this code does not know (a newer release migrated it during a rolling
// upgrade) is reported but does not make the instance unready: migrations only add, and taking
// the old instances out before the new ones answer would stop the service.

import { db, dbProvider, type Db, type DbProvider } from './db';
import { databaseOutage, DatabaseTimeoutError } from './db-outage';
import { log } from './log';
import { MIGRATIONS_TABLE } from './migrate/constants';
import { defaultMigrationsDir, readMigrations, type Migration } from './migrate/runner';

export const READY_TIMEOUT_MS = 2000;

type Ready = {
  ready: true;
  database: DbProvider;
  migrations: { applied: number; latest: string | null; unknown: string[] };
};
type NotReady = { ready: false; reason: 'database' | 'migrations'; message: string };
/** The answer of /api/ready; `ms` is how long the check took. */
export type Readiness = (Ready | NotReady) & { ms: number };

const localCache = new Map<string, Migration[]>();

/** The repository's migrations, read once per folder (they do not change while the server runs). */
function localMigrations(provider: DbProvider, dir?: string): Migration[] {
  const folder = dir ?? defaultMigrationsDir(provider);
  let list = localCache.get(folder);
  if (list === undefined) {
    list = readMigrations(folder);
    localCache.set(folder, list);
  }
  return list;
}

function withTimeout<T>(promise: Promise<T>, ms: number): Promise<T> {
  let timer: NodeJS.Timeout | undefined;
  const timeout = new Promise<never>((_, reject) => {
    timer = setTimeout(() => reject(new DatabaseTimeoutError('The database', ms)), ms);
  });
  return Promise.race([promise, timeout]).finally(() => clearTimeout(timer));
}

function isMissingTable(error: unknown): boolean {
  const text = error instanceof Error ? error.message : String(error);
  return /no such table|42P01|does not exist/i.test(text);
}

type Applied = { name: string; checksum: string };

async function check(client: Db, provider: DbProvider, migrationsDir?: string): Promise<Ready | NotReady> {
  await client.$queryRawUnsafe('SELECT 1');
  let applied: Applied[];
  try {
    applied = await client.$queryRawUnsafe<Applied[]>(`SELECT "name", "checksum" FROM "${MIGRATIONS_TABLE}"`);
  } catch (error) {
    if (databaseOutage(error) === null && isMissingTable(error)) {
      return { ready: false, reason: 'migrations', message: 'The database has no migrations applied; run npm run db:migrate.' };
    }
    throw error;
  }
  const local = localMigrations(provider, migrationsDir);
  const byName = new Map(applied.map((a) => [a.name, a.checksum]));
  const pending = local.filter((m) => !byName.has(m.name)).map((m) => m.name);
  const changed = local.filter((m) => byName.has(m.name) && byName.get(m.name) !== m.checksum).map((m) => m.name);
  if (pending.length > 0 || changed.length > 0) {
    // Counts in the public answer; the names go to the server log (the endpoint needs no session).
    log.warn('migrations not current', { pending, changed });
    const parts = [pending.length > 0 ? `${pending.length} pending` : '', changed.length > 0 ? `${changed.length} edited after being applied` : ''];
    const summary = parts.filter((p) => p !== '').join(', ');
    return { ready: false, reason: 'migrations', message: `Migrations are not current (${summary}); run npm run db:migrate.` };
  }
  const known = new Set(local.map((m) => m.name));
  return {
    ready: true,
    database: provider,
    migrations: { applied: local.length, latest: local.at(-1)?.name ?? null, unknown: applied.map((a) => a.name).filter((n) => !known.has(n)).sort() },
  };
}

export type ReadinessOptions = { client?: Db; provider?: DbProvider; timeoutMs?: number; migrationsDir?: string };

/** Checks readiness; never throws. */
export async function readiness(options: ReadinessOptions = {}): Promise<Readiness> {
  const started = performance.now();
  const timeoutMs = options.timeoutMs ?? READY_TIMEOUT_MS;
  const ms = () => Math.round(performance.now() - started);
  try {
    const client = options.client ?? db();
    const provider = options.provider ?? dbProvider();
    const result = await withTimeout(check(client, provider, options.migrationsDir), timeoutMs);
    if (!result.ready) log.warn('not ready', { reason: result.reason, detail: result.message });
    return { ...result, ms: ms() };
  } catch (error) {
    const outage = databaseOutage(error);
    if (outage !== null) {
      log.warn('not ready', { reason: 'database', outage, detail: error instanceof Error ? error.message.trim().split('\n').at(-1) : String(error) });
      return { ready: false, reason: 'database', message: 'The database is not answering.', ms: ms() };
    }
    log.error('readiness check failed', { error });
    return { ready: false, reason: 'database', message: 'The database check failed; see the server log.', ms: ms() };
  }
}
