/**
 * Write transactions for queue and fit state, safe on SQLite and PostgreSQL.
 *
 * Every state transition runs in `writeTx(db, lockKeys, fn)`:
 * - The transaction's FIRST statement is a no-op UPDATE of the rows named in `lockKeys`
 *   (`UPDATE "QueueItem" SET "round" = "round" WHERE id = …`, `UPDATE "Project" SET
 *   "currentRevision" = "currentRevision" WHERE id = …`).
 *   · SQLite: a write as the first statement takes the database write lock at once, so the
 *     transaction behaves like BEGIN IMMEDIATE: a second connection waits on busy_timeout instead
 *     of failing when it upgrades a read snapshot (SQLITE_BUSY_SNAPSHOT). Within one Prisma client
 *     the better-sqlite3 adapter serialises transactions anyway.
 *   · PostgreSQL (READ COMMITTED): the UPDATE takes the row lock, so two transactions on the same
 *     item or project run one after the other, and every later statement of the second sees the
 *     first one's committed writes.
 * - SQLite allows one writer at a time per database anyway, so on SQLite every writeTx of this
 *   process also queues on one in-process mutex: several Prisma clients (connections) in one
 *   process then take turns instead of spinning on the busy handler. Other processes are held
 *   off by the write lock and busy_timeout.
 * - Transient failures (SQLite busy, PostgreSQL serialization failure / deadlock, Prisma's
 *   P2034 / P2028) are retried with jittered back-off; the function must therefore be idempotent
 *   up to its commit (it is: all effects are inside the transaction).
 */
import { Prisma } from '../generated/sqlite/client';
import type { Db, DbTx } from '../db';
import { record } from './trace';

export type LockKey = { readonly table: 'QueueItem' | 'Project' | 'Fit'; readonly id: string };

const TX_OPTIONS = { maxWait: 15_000, timeout: 30_000 } as const;

export type Provider = 'sqlite' | 'postgresql';

/** Which database a client talks to (read once from the client's generated configuration). */
export function providerOf(client: Db): Provider {
  // The generated client records its provider in `_activeProvider`; it is not part of the typed
  // surface, so it is read through a narrow structural view. Both values are the only two we build.
  const p = (client as unknown as { _activeProvider?: unknown })._activeProvider;
  return p === 'postgresql' ? 'postgresql' : 'sqlite';
}

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

async function lockRows(tx: DbTx, keys: readonly LockKey[]): Promise<void> {
  // Fixed order (table, id) so that two transactions never lock the same rows in opposite order.
  const sorted = [...keys].sort((a, b) => (a.table === b.table ? (a.id < b.id ? -1 : a.id > b.id ? 1 : 0) : a.table < b.table ? -1 : 1));
  for (const k of sorted) {
    if (k.table === 'QueueItem') await tx.$executeRaw`UPDATE "QueueItem" SET "round" = "round" WHERE "id" = ${k.id}`;
    else if (k.table === 'Project') await tx.$executeRaw`UPDATE "Project" SET "currentRevision" = "currentRevision" WHERE "id" = ${k.id}`;
    else await tx.$executeRaw`UPDATE "Fit" SET "progress" = "progress" WHERE "id" = ${k.id}`;
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

const gateHolder = globalThis as typeof globalThis & { __borderlineWriterGate?: Int32Array };

/** Slots of `writerGate()`. */
export const GATE_PENDING = 0;
export const GATE_BACKGROUND_BUSY = 1;

/**
 * Two counters shared with background writer threads that have their own SQLite connection (the
 * standings writer), in a SharedArrayBuffer:
 * - [GATE_PENDING] the number of this thread's writes waiting or running. A background writer
 *   checks it before each batch and waits while it is non-zero, so reviewers' requests get the
 *   database's single write lock first.
 * - [GATE_BACKGROUND_BUSY] 1 while a background writer runs a statement. This thread waits for it
 *   to drop to 0 before it starts a write, asynchronously: better-sqlite3 waits for a lock held by
 *   another connection inside the synchronous call (SQLite's busy handler sleeps), which would
 *   freeze the event loop — every request of the process — for as long as the other statement runs.
 * Both sides set their own slot before reading the other's (sequentially consistent atomics), so
 * at most one of them goes ahead.
 */
export function writerGate(): Int32Array {
  if (!gateHolder.__borderlineWriterGate || gateHolder.__borderlineWriterGate.length < 2) {
    gateHolder.__borderlineWriterGate = new Int32Array(new SharedArrayBuffer(8));
  }
  return gateHolder.__borderlineWriterGate;
}

async function gated<T>(fn: () => Promise<T>): Promise<T> {
  const gate = writerGate();
  Atomics.add(gate, GATE_PENDING, 1);
  try {
    return await fn();
  } finally {
    Atomics.sub(gate, GATE_PENDING, 1);
  }
}

// Atomics.waitAsync (Node 16+) is newer than the TypeScript library this project compiles against.
type WaitAsync = (array: Int32Array, index: number, value: number, timeoutMs: number) => { async: boolean; value: Promise<string> | string };
const waitAsync = (Atomics as unknown as { waitAsync?: WaitAsync }).waitAsync;

/** Resolves once no background writer is inside a statement (see writerGate). */
async function backgroundIdle(): Promise<void> {
  const gate = writerGate();
  while (Atomics.load(gate, GATE_BACKGROUND_BUSY) !== 0) {
    const w = waitAsync?.(gate, GATE_BACKGROUND_BUSY, 1, 50);
    if (w?.async) await w.value;
    else if (!w) await new Promise((r) => setTimeout(r, 1));
  }
}

/**
 * A write outside a transaction (bulk inserts, chunked deletes): on SQLite it takes its turn on the
 * same mutex as writeTx, so it never runs on the shared connection while another request's
 * transaction is open there; on PostgreSQL it runs as is.
 */
export function serialWrite<T>(db: Db, fn: () => Promise<T>): Promise<T> {
  return providerOf(db) === 'sqlite' ? gated(() => sqliteTurn(fn)) : fn();
}

/** Runs `fn` when every earlier SQLite write transaction of this process has finished. */
async function sqliteTurn<T>(fn: () => Promise<T>): Promise<T> {
  const previous = sqliteTail;
  let release: () => void = () => {};
  sqliteTail = new Promise<void>((r) => (release = r));
  const w0 = performance.now();
  await previous;
  await backgroundIdle();
  const w1 = performance.now();
  record('sqlite.mutexWait', w1 - w0);
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
      await lockRows(tx, keys);
      return fn(tx);
    }, TX_OPTIONS);
  let lastError: unknown;
  for (let attempt = 0; attempt < attempts; attempt++) {
    try {
      return await (sqlite ? gated(() => sqliteTurn(once)) : once());
    } catch (e) {
      if (!isTransient(e)) throw e;
      lastError = e;
      const backoff = Math.min(400, 10 * 2 ** attempt) * (0.5 + Math.random());
      await new Promise((r) => setTimeout(r, backoff));
    }
  }
  throw lastError;
}
