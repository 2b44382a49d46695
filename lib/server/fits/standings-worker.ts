/**
 * Worker-thread entry that stores and prunes standings over its own database connection (started
 * by standings-writer.ts; not imported by anything else). 100k rows per refit then cost the server
 * thread nothing but handing over a few typed arrays: no row objects, no statement parameters, no
 * synchronous SQLite calls on the thread that answers requests.
 *
 * workerData: { provider: 'sqlite', file, gate } | { provider: 'postgresql', url }
 * SQLite has one write lock per database: before each batch the worker waits while the server
 * thread has writes waiting or running, and flags the statement it runs so that the server thread
 * waits for it without blocking its event loop (`gate`, see lib/server/sqlite-gate.ts and
 * `turn` below); reviewers' votes and claims go first.
 * Protocol:
 *   ← { type: 'write', id, fitId, rows: StandingColumns }   → { type: 'done', id, count }
 *   ← { type: 'prune', id, fitIds: string[] }                → { type: 'done', id, count }
 *   ← { type: 'model', id, fitId, bytes }  (Fit.model)         → { type: 'done', id, count }
 *   → { type: 'error', id, message }
 * Between batches the worker pauses with no lock held: on SQLite a few milliseconds, so other
 * writers (the server's own connection, other processes) get their turn; on PostgreSQL as long as
 * the batch took (`pause`), so storing standings takes at most half of a database backend.
 */
import { parentPort, workerData } from 'node:worker_threads';
import Database from 'better-sqlite3';
import pg from 'pg';
import { from as copyFrom } from 'pg-copy-streams';
import { flagNames, supportKindName } from '../../margin/standings';
import { backgroundTurn, GATE_BACKGROUND_BUSY } from '../sqlite-gate';
import { lowerThreadPriority } from '../thread-priority';
import { PRUNE_RANGE_SQL, standingId } from './standings-keys';
import { copyLine } from './copy-text';

export interface StandingColumns {
  readonly sampleIds: readonly string[];
  readonly classes: readonly string[];
  readonly margin: Float64Array;
  readonly distance: Float64Array;
  readonly slack: Float64Array;
  readonly alpha: Float64Array;
  /** SUPPORT_* code per sample */
  readonly support: Uint8Array;
  /** NaN = not computed */
  readonly oofMargin: Float64Array;
  /** FLAG_* mask per sample */
  readonly flags: Uint8Array;
  readonly suspicion: Float64Array;
  /** class index per sample */
  readonly predicted: Int32Array;
  /** per sample: boundaries × [decision, out-of-fold decision] as float32 */
  readonly detail: Float32Array;
  readonly detailWidth: number;
}

type Config = { provider: 'sqlite'; file: string; gate?: Int32Array } | { provider: 'postgresql'; url: string };
type Message =
  | { type: 'write'; id: number; fitId: string; rows: StandingColumns }
  | { type: 'prune'; id: number; fitIds: string[] }
  | { type: 'model'; id: number; fitId: string; bytes: Uint8Array };

// The server connection's PRAGMAs (lib/server/db.ts SQLITE_PRAGMAS), repeated here so this thread
// does not load the ORM; busy_timeout comes from the constructor's `timeout`.
const SQLITE_PRAGMAS = ['PRAGMA journal_mode = WAL', 'PRAGMA foreign_keys = ON', 'PRAGMA synchronous = FULL'];
/**
 * Rows per statement: on SQLite the server thread's writes wait for the statement under way (see
 * `turn`), so statements are kept short; PostgreSQL writers do not block each other on a table.
 */
const COLUMNS = ['id', 'fitId', 'sampleId', 'margin', 'distance', 'slack', 'alpha', 'svKind', 'oofMargin', 'flags', 'suspicion', 'predicted', 'detail'];
const BATCH = (workerData as Config).provider === 'sqlite' ? 100 : 2000;

/**
 * PostgreSQL: each batch is one `COPY … FROM STDIN` in COPY's text format (pg-copy-streams): the
 * server parses tab-separated lines (copy-text.ts) with no statement to plan and no parameters to
 * bind. Measured with 100,000 rows shaped like a refit's into a table with the Standing table's
 * columns and indexes (bench database, two runs each): 1.55–1.65 s of the database backend's CPU
 * against 2.0–2.3 s for the INSERT … SELECT FROM unnest(one array per column) it replaced — storage
 * work that competes with reviewers' queries for a small machine's cores.
 */
const PG_COPY = `COPY "Standing" (${COLUMNS.map((c) => `"${c}"`).join(', ')}) FROM STDIN`;

/** Rows [start, end) of the columns as COPY text lines. */
function copyText(fitId: string, r: StandingColumns, start: number, end: number): string {
  let text = '';
  for (let i = start; i < end; i++) text += copyLine(rowValues(fitId, r, i));
  return text;
}

/** Runs one COPY FROM STDIN with `text` as its data, on a pooled connection. */
async function copyIn(text: string): Promise<void> {
  const client = await openPool().connect();
  try {
    await new Promise<void>((resolve, reject) => {
      const stream = client.query(copyFrom(PG_COPY));
      stream.on('finish', resolve);
      stream.on('error', reject);
      stream.end(text);
    });
    client.release();
  } catch (e) {
    // A connection whose COPY failed is closed rather than returned to the pool.
    client.release(e instanceof Error ? e : true);
    throw e;
  }
}
const PAUSE_MS = 3;

const port = parentPort;
if (!port) throw new Error('lib/server/fits/standings-worker.ts must run in a worker thread');
const config = workerData as Config;

/**
 * On PostgreSQL storing standings is background work that nobody waits for (the queue was rebuilt
 * before), so this thread asks for a lower OS priority, like the engine thread (nice 10). Not on
 * SQLite: there the thread holds the database's write lock while a statement runs, and a thread
 * preempted while holding it would keep reviewers' writes waiting.
 */
const STANDINGS_NICE_POSTGRESQL = 10;
if (config.provider === 'postgresql') lowerThreadPriority(STANDINGS_NICE_POSTGRESQL);

function finite(v: number): number {
  if (Number.isNaN(v)) return 0;
  if (v === Infinity) return 1e30;
  if (v === -Infinity) return -1e30;
  return v;
}

const sleep = (ms: number) => new Promise<void>((r) => setTimeout(r, ms));

/**
 * PostgreSQL: after each statement the writer rests as long as the statement took, so at most half
 * of one database backend's time goes to storing or pruning standings — the way PostgreSQL's own
 * vacuum throttles itself (cost delay). Reviewers do not wait for these rows (the queue was rebuilt
 * before them), while a backend inserting 100k rows flat out took a whole core from their queries
 * on a small machine. The price: a fit's standings are complete (progress 1) about a second later
 * per 100k rows (measured: 6.6–7.4 s instead of 5.6–6.6 s from the closing vote), and a worker
 * running one refit at a time takes its next job that much later (a second worker does not wait).
 */
const PG_REST_PER_BUSY = 1;

/** The breather after every batch: a few milliseconds on SQLite, the rest above on PostgreSQL. */
async function pause(busyMs: number): Promise<void> {
  await sleep(config.provider === 'sqlite' ? PAUSE_MS : Math.min(500, busyMs * PG_REST_PER_BUSY));
}

/**
 * Runs one SQLite statement as a background writer (lib/server/sqlite-gate.ts): after the server
 * thread's pending writes, flagged busy while it runs, so the server thread never blocks on the lock.
 */
async function turn<T>(statement: () => T): Promise<T> {
  const gate = config.provider === 'sqlite' && config.gate && config.gate.length > GATE_BACKGROUND_BUSY ? config.gate : undefined;
  if (!gate) return statement();
  return backgroundTurn(gate, statement);
}

function rowValues(fitId: string, r: StandingColumns, i: number): unknown[] {
  const w = r.detailWidth;
  const detail = Buffer.from(r.detail.buffer, r.detail.byteOffset + i * w * 4, w * 4);
  return [
    standingId(fitId, i),
    fitId,
    r.sampleIds[i],
    finite(r.margin[i]),
    finite(r.distance[i]),
    finite(r.slack[i]),
    finite(r.alpha[i]),
    supportKindName(r.support[i]),
    Number.isNaN(r.oofMargin[i]) ? null : finite(r.oofMargin[i]),
    flagNames(r.flags[i]).join(','),
    finite(r.suspicion[i]),
    r.classes[r.predicted[i]] ?? '',
    Buffer.from(detail),
  ];
}

let sqlite: Database.Database | null = null;
let pool: pg.Pool | null = null;

function openSqlite(): Database.Database {
  if (!sqlite) {
    if (config.provider !== 'sqlite') throw new Error('not a SQLite configuration');
    sqlite = new Database(config.file, { timeout: 5000 });
    for (const p of SQLITE_PRAGMAS) sqlite.exec(p);
  }
  return sqlite;
}

function openPool(): pg.Pool {
  if (!pool) {
    if (config.provider !== 'postgresql') throw new Error('not a PostgreSQL configuration');
    pool = new pg.Pool({ connectionString: config.url, max: 1 });
    pool.on('error', () => undefined);
  }
  return pool;
}

async function write(fitId: string, r: StandingColumns): Promise<number> {
  const n = r.sampleIds.length;
  for (let start = 0; start < n; start += BATCH) {
    const end = Math.min(n, start + BATCH);
    const count = end - start;
    const t0 = performance.now();
    if (config.provider === 'sqlite') {
      const values: unknown[] = [];
      for (let i = start; i < end; i++) values.push(...rowValues(fitId, r, i));
      const tuple = `(${COLUMNS.map(() => '?').join(', ')})`;
      const insert = openSqlite().prepare(`INSERT INTO "Standing" (${COLUMNS.map((c) => `"${c}"`).join(', ')}) VALUES ${Array(count).fill(tuple).join(', ')}`);
      await turn(() => insert.run(...values));
    } else {
      await copyIn(copyText(fitId, r, start, end));
    }
    await pause(performance.now() - t0);
  }
  return n;
}

async function prune(fitIds: readonly string[]): Promise<number> {
  let removed = 0;
  for (const fitId of fitIds) {
    for (let lo = 0; ; lo += BATCH) {
      const args = [standingId(fitId, lo), standingId(fitId, lo + BATCH)];
      let changed: number;
      const t0 = performance.now();
      if (config.provider === 'sqlite') {
        const remove = openSqlite().prepare(PRUNE_RANGE_SQL.sqlite);
        changed = (await turn(() => remove.run(...args))).changes;
      } else {
        changed = (await openPool().query(PRUNE_RANGE_SQL.postgresql, args)).rowCount ?? 0;
      }
      removed += changed;
      await pause(performance.now() - t0);
      if (changed === 0) break;
    }
    // Rows stored under other ids (older formats): whatever is left of the fit, in one statement.
    if (config.provider === 'sqlite') {
      const rest = openSqlite().prepare('DELETE FROM "Standing" WHERE "fitId" = ?');
      removed += (await turn(() => rest.run(fitId))).changes;
    } else removed += (await openPool().query('DELETE FROM "Standing" WHERE "fitId" = $1', [fitId])).rowCount ?? 0;
  }
  return removed;
}

/** Stores a fit's serialised model (one statement; on SQLite a background writer's turn like the rest). */
async function model(fitId: string, bytes: Uint8Array): Promise<number> {
  const blob = Buffer.from(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  if (config.provider === 'sqlite') {
    const update = openSqlite().prepare('UPDATE "Fit" SET "model" = ? WHERE "id" = ?');
    return (await turn(() => update.run(blob, fitId))).changes;
  }
  return (await openPool().query('UPDATE "Fit" SET "model" = $1 WHERE "id" = $2', [blob, fitId])).rowCount ?? 0;
}

let chain: Promise<unknown> = Promise.resolve();
port.on('message', (m: Message) => {
  chain = chain.then(async () => {
    try {
      const count = m.type === 'write' ? await write(m.fitId, m.rows) : m.type === 'model' ? await model(m.fitId, m.bytes) : await prune(m.fitIds);
      port.postMessage({ type: 'done', id: m.id, count });
    } catch (e) {
      port.postMessage({ type: 'error', id: m.id, message: e instanceof Error ? e.message : String(e) });
    }
  });
});
