/**
 * Write transactions for queue and fit state, safe on SQLite and PostgreSQL.
 *
 * Every state transition runs in `writeTx(db, lockKeys, fn)`:
 * - The transaction's FIRST statements lock the rows named in `lockKeys`.
 *   · SQLite: a no-op UPDATE (`UPDATE "QueueItem" SET "round" = "round" WHERE id = …`, likewise
 *     `Project."currentRevision"`, `Fit."progress"`). A write as the first statement takes the
 *     database write lock at once, so the transaction behaves like BEGIN IMMEDIATE: a second
 *     connection waits on busy_timeout instead of failing when it upgrades a read snapshot
 *     (SQLITE_BUSY_SNAPSHOT). Within one Prisma client the better-sqlite3 adapter serialises
 *     transactions anyway.
 *   · PostgreSQL (READ COMMITTED): `SELECT 1 … FOR NO KEY UPDATE`, so two transactions on the same
 *     item or project run one after the other, and every later statement of the second sees the
 *     first one's committed writes. Not a no-op UPDATE: that writes a new row version, and
 *     PostgreSQL re-checks the foreign keys of a row its own transaction wrote whenever the
 *     transaction updates it again; a vote's update of its item then took FOR KEY SHARE on the
 *     project's row and waited for whoever held that row — a refit's completing transaction
 *     rescoring the queue, which in turn waited for the vote's item: a deadlock, broken by
 *     PostgreSQL after 1 s (bench:team; test/server/queue-locks.test.ts). NO KEY UPDATE rather
 *     than UPDATE: it leaves the FOR KEY SHARE of foreign-key checks by other transactions
 *     (a vote row referencing a locked item, a queue item referencing a locked project) unblocked.
 * - SQLite allows one writer at a time per database anyway, so on SQLite every writeTx of this
 *   thread also queues on one mutex, and threads with their own connection take turns through the
 *   writer gate (lib/server/sqlite-gate.ts), so the server thread never blocks in SQLite's busy
 *   handler. Other processes are held off by the write lock and busy_timeout.
 * - Transient failures (SQLite busy, PostgreSQL serialization failure / deadlock, Prisma's
 *   P2034 / P2028) are retried with jittered back-off; the function must therefore be idempotent
 *   up to its commit (it is: all effects are inside the transaction).
 */
import { Prisma } from '../generated/sqlite/client';
import { providerOf, type Db, type DbProvider, type DbTx } from '../db';
import { record } from '../trace';
import { asPendingWrite, backgroundIdle, backgroundTurn, newWriterGate } from '../sqlite-gate';

export type LockKey = { readonly table: 'QueueItem' | 'Project' | 'Fit'; readonly id: string };

const TX_OPTIONS = { maxWait: 15_000, timeout: 30_000 } as const;

export type Provider = DbProvider;
export { providerOf };

function messageOf(e: unknown): string {
  return e instanceof Error ? `${e.name} ${e.message} ${String((e as { code?: unknown }).code ?? '')}` : String(e);
}

/** True for errors worth retrying: lock contention, serialization failures, deadlocks. */
export function isTransient(e: unknown): boolean {
  if (e instanceof Prisma.PrismaClientKnownRequestError && (e.code === 'P2034' || e.code === 'P2028')) return true;
  const m = messageOf(e);
  return /SQLITE_BUSY|database is locked|could not serialize|deadlock detected|40001|40P01|write conflict|Transaction already closed|Unable to start a transaction/i.test(
    m,
  );
}

/** Locks `keys` in a transaction as writeTx does (see the module comment). */
export async function lockRows(tx: DbTx, keys: readonly LockKey[], sqlite: boolean): Promise<void> {
  // Fixed order (table, id) so that two transactions never lock the same rows in opposite order.
  const sorted = [...keys].sort((a, b) => (a.table === b.table ? (a.id < b.id ? -1 : a.id > b.id ? 1 : 0) : a.table < b.table ? -1 : 1));
  if (sqlite) {
    for (const k of sorted) {
      if (k.table === 'QueueItem') await tx.$executeRaw`UPDATE "QueueItem" SET "round" = "round" WHERE "id" = ${k.id}`;
      else if (k.table === 'Project') await tx.$executeRaw`UPDATE "Project" SET "currentRevision" = "currentRevision" WHERE "id" = ${k.id}`;
      else await tx.$executeRaw`UPDATE "Fit" SET "progress" = "progress" WHERE "id" = ${k.id}`;
    }
    return;
  }
  // PostgreSQL: one statement per table, rows locked in id order (the sort runs below the lock).
  for (const table of ['Fit', 'Project', 'QueueItem'] as const) {
    const ids = sorted.filter((k) => k.table === table).map((k) => k.id);
    if (ids.length === 0) continue;
    // `table` is one of the three literal names above, never input.
    await tx.$queryRaw`SELECT 1 FROM ${Prisma.raw(`"${table}"`)} WHERE "id" IN (${Prisma.join(ids)}) ORDER BY "id" FOR NO KEY UPDATE`;
  }
}

export interface WriteTxOptions {
  readonly attempts?: number;
  /**
   * SQLite only: a row to lock (no-op UPDATE) when `lockKeys` is empty, so the transaction takes the
   * write lock with its first statement. PostgreSQL does not lock it (no contention for readers of
   * that row).
   */
  readonly sqliteLock?: LockKey;
}

let sqliteTail: Promise<void> = Promise.resolve();

const gateHolder = globalThis as typeof globalThis & { __borderlineWriterGate?: Int32Array; __borderlineBackgroundGate?: Int32Array };

/**
 * The server thread's gate (lib/server/sqlite-gate.ts), shared with background writer threads that
 * have their own SQLite connection (standings writer, import thread): it counts this thread's
 * pending writes, and this thread waits, asynchronously, while a background thread is inside one.
 */
export function writerGate(): Int32Array {
  if (!gateHolder.__borderlineWriterGate || gateHolder.__borderlineWriterGate.length < 2) {
    gateHolder.__borderlineWriterGate = newWriterGate();
  }
  return gateHolder.__borderlineWriterGate;
}

/**
 * Called once in a background thread with its own connection (the import thread), with the server
 * thread's gate: from then on this thread's writeTx and serialWrite take their turn as a background
 * writer — after the server thread's pending writes, flagged busy while they run.
 */
export function writeAsBackgroundThread(serverGate: Int32Array): void {
  gateHolder.__borderlineBackgroundGate = serverGate;
}

/**
 * A write outside a transaction (bulk inserts, chunked deletes): on SQLite it takes its turn on the
 * same mutex as writeTx, so it never runs on the shared connection while another request's
 * transaction is open there; on PostgreSQL it runs as is.
 */
export function serialWrite<T>(db: Db, fn: () => Promise<T>): Promise<T> {
  return providerOf(db) === 'sqlite' ? sqliteWrite(fn) : fn();
}

function sqliteWrite<T>(fn: () => Promise<T>): Promise<T> {
  const background = gateHolder.__borderlineBackgroundGate;
  if (background) return sqliteTurn(() => backgroundTurn(background, fn), false);
  const gate = writerGate();
  return asPendingWrite(gate, () => sqliteTurn(fn, true));
}

/**
 * Runs `fn` when every earlier SQLite write of this thread has finished (and, on the server thread,
 * when no background writer is inside a write).
 */
async function sqliteTurn<T>(fn: () => Promise<T>, serverThread: boolean): Promise<T> {
  const previous = sqliteTail;
  let release: () => void = () => {};
  sqliteTail = new Promise<void>((r) => (release = r));
  const w0 = performance.now();
  await previous;
  const wPrevious = performance.now();
  if (serverThread) await backgroundIdle(writerGate());
  const w1 = performance.now();
  record('sqlite.mutexWait', w1 - w0);
  record('sqlite.mutexWait.background', w1 - wPrevious);
  try {
    return await fn();
  } finally {
    record('sqlite.mutexHold', performance.now() - w1);
    release();
  }
}

/**
 * Runs `fn` in an interactive transaction that first locks `lockKeys` (see the module comment),
 * retrying transient failures. Non-transient errors (including ActionError refusals) propagate
 * at once, after the transaction rolled back.
 */
export async function writeTx<T>(db: Db, lockKeys: readonly LockKey[], fn: (tx: DbTx) => Promise<T>, options: WriteTxOptions = {}): Promise<T> {
  const attempts = options.attempts ?? 8;
  const sqlite = providerOf(db) === 'sqlite';
  const keys = sqlite && lockKeys.length === 0 && options.sqliteLock ? [options.sqliteLock] : lockKeys;
  const once = () =>
    db.$transaction(async (tx) => {
      await lockRows(tx, keys, sqlite);
      return fn(tx);
    }, TX_OPTIONS);
  let lastError: unknown;
  for (let attempt = 0; attempt < attempts; attempt++) {
    try {
      return await (sqlite ? sqliteWrite(once) : once());
    } catch (e) {
      if (!isTransient(e)) throw e;
      lastError = e;
      const backoff = Math.min(400, 10 * 2 ** attempt) * (0.5 + Math.random());
      await new Promise((r) => setTimeout(r, backoff));
    }
  }
  throw lastError;
}
