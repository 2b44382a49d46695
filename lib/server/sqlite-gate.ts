/**
 * Taking turns at SQLite's single write lock between the server thread and background threads that
 * have their own connection (the standings writer, the import thread). No imports: worker entries
 * load this without the ORM.
 *
 * Why: better-sqlite3 waits for a lock held by another connection inside the synchronous call
 * (SQLite's busy handler sleeps), which on the server thread would freeze the event loop — every
 * request of the process — for as long as the other writer holds the lock. So the server thread
 * never starts a write while a background thread is inside one, and waits for that asynchronously.
 *
 * The gate: two Int32 counters in a SharedArrayBuffer, created by the server thread and handed to
 * background threads in their workerData.
 * - [GATE_PENDING] the server thread's writes waiting or running. A background writer starts only
 *   when it has been 0 for a short quiet spell (reviewers' votes and claims go first).
 * - [GATE_BACKGROUND_BUSY] the background writers inside a write (a statement or a transaction).
 *   The server thread waits for 0 before it starts a write.
 * Each side raises its own counter before it reads the other's (sequentially consistent atomics),
 * so the server thread and a background writer are never both inside a write; background writers
 * among themselves wait on SQLite's busy handler, which blocks only their own thread.
 */

export const GATE_PENDING = 0;
export const GATE_BACKGROUND_BUSY = 1;

export function newWriterGate(): Int32Array {
  return new Int32Array(new SharedArrayBuffer(8));
}

// Atomics.waitAsync (Node 16+) is newer than the TypeScript library this project compiles against.
type WaitAsync = (array: Int32Array, index: number, value: number, timeoutMs: number) => { async: boolean; value: Promise<string> | string };
const waitAsync = (Atomics as unknown as { waitAsync?: WaitAsync }).waitAsync;

const sleep = (ms: number) => new Promise<void>((r) => setTimeout(r, ms));

/** Server thread: resolves once no background writer is inside a write. */
export async function backgroundIdle(gate: Int32Array): Promise<void> {
  for (;;) {
    const busy = Atomics.load(gate, GATE_BACKGROUND_BUSY);
    if (busy === 0) return;
    const w = waitAsync?.(gate, GATE_BACKGROUND_BUSY, busy, 50);
    if (w?.async) await w.value;
    else if (!w) await sleep(1);
  }
}

/** Server thread: counts `fn` as a pending write for its whole duration (waiting included). */
export async function asPendingWrite<T>(gate: Int32Array, fn: () => Promise<T>): Promise<T> {
  Atomics.add(gate, GATE_PENDING, 1);
  try {
    return await fn();
  } finally {
    Atomics.sub(gate, GATE_PENDING, 1);
  }
}

export interface BackgroundTurnOptions {
  /** The server thread must have had no write pending for this long (default 10 ms). */
  readonly quietMs?: number;
  /** After this long without a turn, go ahead anyway (default 10 s), so background work is never starved. */
  readonly patienceMs?: number;
}

/**
 * Background thread: runs `write` (synchronous or not) when the server thread has had no write
 * pending for `quietMs`, with this thread counted as busy for its duration. Requests come in bursts;
 * a write started in the gap between two of them would hold up the second, hence the quiet spell.
 */
export async function backgroundTurn<T>(gate: Int32Array, write: () => T | Promise<T>, options: BackgroundTurnOptions = {}): Promise<T> {
  const quietMs = options.quietMs ?? 10;
  const patienceMs = options.patienceMs ?? 10_000;
  const start = performance.now();
  let quietSince = -1;
  for (;;) {
    const now = performance.now();
    const patient = now - start < patienceMs;
    const idle = Atomics.load(gate, GATE_PENDING) === 0;
    if (!idle) quietSince = -1;
    else if (quietSince < 0) quietSince = now;
    if (!patient || (idle && now - quietSince >= quietMs)) {
      Atomics.add(gate, GATE_BACKGROUND_BUSY, 1);
      if (!patient || Atomics.load(gate, GATE_PENDING) === 0) break;
      release(gate);
    }
    await sleep(2);
  }
  try {
    return await write();
  } finally {
    release(gate);
  }
}

function release(gate: Int32Array): void {
  Atomics.sub(gate, GATE_BACKGROUND_BUSY, 1);
  Atomics.notify(gate, GATE_BACKGROUND_BUSY);
}
