// The one Prisma client of the server.
//
// `db()` returns a lazily created, process-wide client for DATABASE_URL (cached on globalThis so
// Next's dev hot reload does not open a new connection per reload). The driver adapter follows
// the URL: `file:` → better-sqlite3 (embedded, default), `postgres(ql)://` → node-postgres.
//
// Two Prisma clients are generated from the one model (lib/server/generated/{sqlite,postgresql},
// see scripts/prisma-generate.mjs). Their query APIs are the same for this schema (it uses only
// portable column types), so the SQLite client's type is the canonical `Db` type for all code.

import { mkdirSync } from 'node:fs';
import { dirname } from 'node:path';
import { PrismaBetterSqlite3 } from '@prisma/adapter-better-sqlite3';
import { PrismaPg } from '@prisma/adapter-pg';
import type { SqlDriverAdapter, SqlMigrationAwareDriverAdapterFactory } from '@prisma/driver-adapter-utils';
import { PrismaClient as PostgresqlPrismaClient } from './generated/postgresql/client';
import { Prisma, PrismaClient as SqlitePrismaClient } from './generated/sqlite/client';
import { log } from './log';
import { env, type DatabaseConfig } from './env';

/** The Prisma client type used by all server code (whatever the database). */
export type Db = SqlitePrismaClient;
/** The client handed to `db.$transaction(async (tx) => …)` callbacks. */
export type DbTx = Prisma.TransactionClient;
export type DbProvider = DatabaseConfig['provider'];
export { Prisma };

/** SQLite busy timeout: how long a writer waits for another connection's write lock. */
export const SQLITE_BUSY_TIMEOUT_MS = 5000;

/**
 * PRAGMAs applied to every SQLite connection the app opens. journal_mode=WAL lets readers work
 * while one writer commits (and is persistent in the file); busy_timeout makes a writer wait
 * instead of failing at once; foreign_keys is per connection and OFF by default in SQLite.
 */
export const SQLITE_PRAGMAS = [
  'PRAGMA journal_mode = WAL',
  `PRAGMA busy_timeout = ${SQLITE_BUSY_TIMEOUT_MS}`,
  'PRAGMA foreign_keys = ON',
  'PRAGMA synchronous = FULL',
] as const;

/**
 * Wraps the better-sqlite3 adapter factory so every connection it opens gets SQLITE_PRAGMAS
 * (the adapter itself only passes constructor options such as `timeout` to better-sqlite3).
 */
export class SqliteAdapterWithPragmas implements SqlMigrationAwareDriverAdapterFactory {
  readonly provider = 'sqlite';
  readonly adapterName: string;
  readonly #inner: PrismaBetterSqlite3;

  constructor(file: string) {
    this.#inner = new PrismaBetterSqlite3({ url: file, timeout: SQLITE_BUSY_TIMEOUT_MS });
    this.adapterName = this.#inner.adapterName;
  }

  async connect(): Promise<SqlDriverAdapter> {
    const adapter = await this.#inner.connect();
    await adapter.executeScript(SQLITE_PRAGMAS.map((p) => `${p};`).join('\n'));
    return adapter;
  }

  async connectToShadowDb(): Promise<SqlDriverAdapter> {
    const adapter = await this.#inner.connectToShadowDb();
    await adapter.executeScript(SQLITE_PRAGMAS.map((p) => `${p};`).join('\n'));
    return adapter;
  }
}

export type CreateDbOptions = {
  /** Prisma log levels to print as Prisma formats them (default: warnings and errors as JSON log lines). */
  log?: ('query' | 'info' | 'warn' | 'error')[];
};

const EVENT_LOG = [
  { emit: 'event', level: 'warn' },
  { emit: 'event', level: 'error' },
] as const;

/** Prisma's warnings and errors as one JSON line each (lib/server/log.ts) instead of text blocks. */
function forwardPrismaLog(client: { $on(event: 'warn' | 'error', cb: (e: { message: string; target: string }) => void): void }): void {
  client.$on('warn', (e) => log.warn('prisma warning', { target: e.target, detail: e.message }));
  client.$on('error', (e) => log.error('prisma error', { target: e.target, detail: e.message }));
}

/** Which database a client talks to (read once from the client's generated configuration). */
export function providerOf(client: Db): DbProvider {
  // The generated client records its provider in `_activeProvider`; it is not part of the typed
  // surface, so it is read through a narrow structural view. Both values are the only two we build.
  const p = (client as unknown as { _activeProvider?: unknown })._activeProvider;
  return p === 'postgresql' ? 'postgresql' : 'sqlite';
}

/** Connections of a process's PostgreSQL client pool (node-postgres's default size, kept open). */
export const PG_POOL_SIZE = 10;

/**
 * Opens every connection of a PostgreSQL client's pool now, so the first burst of requests does
 * not pay for opening them: when an app instance starts, twenty reviewers asking at once would
 * otherwise each wait for a new connection (a new server process) on a busy machine. The pool
 * opens one connection per waiting query, so PG_POOL_SIZE concurrent trivial queries open them
 * all. Nothing to do on SQLite.
 */
export async function warmDbPool(client: Db): Promise<void> {
  if (providerOf(client) !== 'postgresql') return;
  await Promise.all(Array.from({ length: PG_POOL_SIZE }, () => client.$queryRawUnsafe('SELECT 1')));
}

/** A new client for one database. Prefer `db()`; this is for scripts and tests. */
export function createDb(config: DatabaseConfig, options: CreateDbOptions = {}): Db {
  if (config.provider === 'sqlite') {
    mkdirSync(dirname(config.file), { recursive: true });
    const adapter = new SqliteAdapterWithPragmas(config.file);
    if (options.log) return new SqlitePrismaClient({ adapter, log: options.log });
    const client = new SqlitePrismaClient({ adapter, log: [...EVENT_LOG] });
    forwardPrismaLog(client);
    return client as unknown as Db;
  }
  // min = max: a connection once opened stays open (pg-pool closes idle ones only above `min`), so
  // a burst of requests after a quiet spell does not wait for new connections (see warmDbPool).
  const adapter = new PrismaPg({ connectionString: config.url, connectionTimeoutMillis: 10_000, max: PG_POOL_SIZE, min: PG_POOL_SIZE });
  // The PostgreSQL client is generated from the same model as the SQLite one; its delegates and
  // results have the same shapes (PostgreSQL only adds options such as `mode: 'insensitive'`),
  // so it is used through the canonical type. This is the one place the two types meet.
  if (options.log) return new PostgresqlPrismaClient({ adapter, log: options.log }) as unknown as Db;
  const client = new PostgresqlPrismaClient({ adapter, log: [...EVENT_LOG] });
  forwardPrismaLog(client);
  return client as unknown as Db;
}

type Cached = { key: string; client: Db };
const globalForDb = globalThis as typeof globalThis & { __borderlineDb?: Cached };

/** The process-wide client for DATABASE_URL, created on first use. */
export function db(): Db {
  const config = env().database;
  const key = `${config.provider}:${config.provider === 'sqlite' ? config.file : config.url}`;
  const cached = globalForDb.__borderlineDb;
  if (cached !== undefined && cached.key === key) return cached.client;
  if (cached !== undefined) void cached.client.$disconnect();
  const client = createDb(config);
  globalForDb.__borderlineDb = { key, client };
  return client;
}

/** Which database DATABASE_URL selects. */
export function dbProvider(): DbProvider {
  return env().database.provider;
}

/** Closes the process-wide client (scripts call this before exiting). */
export async function disconnectDb(): Promise<void> {
  const cached = globalForDb.__borderlineDb;
  globalForDb.__borderlineDb = undefined;
  if (cached !== undefined) await cached.client.$disconnect();
}

/** True for Prisma's unique-constraint violation (P2002), on either database. */
export function isUniqueViolation(error: unknown): boolean {
  return error instanceof Prisma.PrismaClientKnownRequestError && error.code === 'P2002';
}

/**
 * The database's own message behind a Prisma error (e.g. a trigger's RAISE text), when the driver
 * adapter reported one. Prisma's message may name a different category (SQLite trigger aborts
 * surface as P2003 "Foreign key constraint violated"), so check this for the real cause.
 */
export function driverErrorMessage(error: unknown): string | undefined {
  if (!(error instanceof Prisma.PrismaClientKnownRequestError)) return undefined;
  const adapterError = error.meta?.driverAdapterError;
  if (typeof adapterError !== 'object' || adapterError === null || !('cause' in adapterError)) return undefined;
  const cause = adapterError.cause;
  if (typeof cause === 'object' && cause !== null && 'originalMessage' in cause && typeof cause.originalMessage === 'string') {
    return cause.originalMessage;
  }
  return undefined;
}
