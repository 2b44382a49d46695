/**
 * Large in-process imports run in a long-lived worker thread (thread-worker.ts) with its own
 * database connection, so reading, validating and writing a big file never stalls the server
 * thread that answers reviewers. The same pipeline (`importSamples`) runs there; this side only
 * relays the file's bytes, the progress and the outcome, and announces the refit afterwards (the
 * fit queue lives on this thread).
 *
 * On SQLite the thread writes as a background writer (lib/server/sqlite-gate.ts): its transaction
 * starts when the server thread has no write pending, and the server thread's writes wait for it
 * asynchronously. A file's bytes are relayed with back-pressure (at most IN_FLIGHT_BYTES sent and
 * not yet read), so memory stays flat however large the file.
 *
 * On PostgreSQL with the job system, a large upload is staged (staged.ts `stageImport`: the file
 * into ImportChunk rows for a worker) in the same thread, for the same reason: writing 4 MB chunks
 * through the ORM (base64, JSON, socket writes, garbage) took a quarter of a second of the server
 * thread per chunk while twenty reviewers waited for it (bench:team).
 *
 * Protocol (ids per task):
 *   → { type: 'start', id, database, teamId, projectId, input }   import the file (importSamples)
 *   → { type: 'stage', id, database, teamId, projectId, settings, userId }   stage it (stageImport)
 *   → { type: 'chunk', id, bytes }   (buffer transferred)   ← { type: 'read', id, bytes }
 *   → { type: 'end', id } | { type: 'fail', id, error }   (the body could not be read)
 *   ← { type: 'progress', id, progress } | { type: 'stored', id, bytes }   (import | stage)
 *   ← { type: 'outcome', id, outcome } | { type: 'staged', id, staged } | { type: 'error', id, error: ThreadError }
 */
import { join } from 'node:path';
import type { Worker } from 'node:worker_threads';
import { startTsWorker } from '../../margin/worker-client';
import { ActionError } from '../authz/errors';
import type { TeamScope } from '../authz/scope';
import { DatabaseOutageError, databaseOutage, type OutageKind } from '../db-outage';
import type { DatabaseConfig } from '../env';
import { writerGate } from '../queue/tx';
import { announceRefit } from '../refit-request';
import type { ImportInput, ImportOutcome, ImportProgress } from './index';
import type { StagedImportSettings } from './job';
import type { StagedImport } from './staged';

/** What `stageImport` takes besides the file (the batch's settings). */
export type StageSettings = Omit<StagedImportSettings, 'bytes' | 'chunks'>;

/** Bytes relayed to the thread and not yet read by it, at most. */
export const IN_FLIGHT_BYTES = 8 * 1024 * 1024;

export type ThreadInput = Omit<ImportInput, 'source'>;

/** An error crossing the thread boundary, rebuilt on this side as the same kind of error. */
export type ThreadError =
  | { kind: 'refusal'; status: ActionError['status']; message: string; fields?: Record<string, string> }
  | { kind: 'outage'; outage: OutageKind; message: string }
  | { kind: 'fault'; name: string; message: string; stack?: string };

export type ToThread =
  | { type: 'start'; id: number; database: DatabaseConfig; teamId: string; projectId: string; input: ThreadInput }
  | { type: 'stage'; id: number; database: DatabaseConfig; teamId: string; projectId: string; settings: StageSettings; userId: string | null }
  | { type: 'chunk'; id: number; bytes: Uint8Array }
  | { type: 'end'; id: number }
  | { type: 'fail'; id: number; error: ThreadError };

export type FromThread =
  | { type: 'read'; id: number; bytes: number }
  | { type: 'progress'; id: number; progress: ImportProgress }
  | { type: 'stored'; id: number; bytes: number }
  | { type: 'outcome'; id: number; outcome: ImportOutcome }
  | { type: 'staged'; id: number; staged: StagedImport }
  | { type: 'error'; id: number; error: ThreadError };

/** The message that ends a task. */
type Finished = Extract<FromThread, { type: 'outcome' | 'staged' }>;

/** Any thrown value as a ThreadError (both directions use this). */
export function toThreadError(error: unknown): ThreadError {
  if (error instanceof ActionError) return { kind: 'refusal', status: error.status, message: error.message, ...(error.fields ? { fields: error.fields } : {}) };
  const outage = databaseOutage(error);
  if (outage) return { kind: 'outage', outage, message: error instanceof Error ? error.message : String(error) };
  if (error instanceof Error) return { kind: 'fault', name: error.name, message: error.message, stack: error.stack };
  return { kind: 'fault', name: 'Error', message: String(error) };
}

export function fromThreadError(e: ThreadError): Error {
  if (e.kind === 'refusal') return new ActionError(e.status, e.message, e.fields);
  if (e.kind === 'outage') return new DatabaseOutageError(e.outage, e.message);
  const error = new Error(e.message);
  error.name = e.name;
  if (e.stack) error.stack = e.stack;
  return error;
}

interface Running {
  readonly onProgress?: (progress: ImportProgress) => void;
  readonly onStored?: (bytes: number) => void;
  readonly resolve: (finished: Finished) => void;
  readonly reject: (error: Error) => void;
  /** bytes sent and not yet reported read */
  inFlight: number;
  /** wakes the relay when the thread has read enough */
  wake: (() => void) | null;
}

interface ThreadState {
  worker: Worker | null;
  nextId: number;
  running: Map<number, Running>;
}

const holder = globalThis as typeof globalThis & { __borderlineImportThread?: ThreadState };
const state = (): ThreadState => (holder.__borderlineImportThread ??= { worker: null, nextId: 1, running: new Map() });

function thread(): Worker {
  const st = state();
  if (st.worker) return st.worker;
  const w = startTsWorker(join(process.cwd(), 'lib', 'server', 'import', 'thread-worker.ts'), { gate: writerGate() });
  w.unref();
  w.on('message', (m: FromThread) => {
    const r = st.running.get(m.id);
    if (!r) return;
    if (m.type === 'read') {
      r.inFlight -= m.bytes;
      r.wake?.();
    } else if (m.type === 'progress') {
      r.onProgress?.(m.progress);
    } else if (m.type === 'stored') {
      r.onStored?.(m.bytes);
    } else {
      st.running.delete(m.id);
      r.wake?.();
      if (m.type === 'error') r.reject(fromThreadError(m.error));
      else r.resolve(m);
    }
  });
  const fail = (error: Error) => {
    if (st.worker === w) st.worker = null;
    for (const r of st.running.values()) {
      r.reject(error);
      r.wake?.();
    }
    st.running.clear();
  };
  w.on('error', (e) => fail(e instanceof Error ? e : new Error(String(e))));
  w.on('exit', (code) => fail(new Error(`the import thread stopped (exit code ${code}); nothing of the import was kept`)));
  st.worker = w;
  return w;
}

/**
 * Runs one task in the thread: sends `start` (its id filled in), relays the file's bytes with
 * back-pressure, and returns the message that ended the task (an error message rejects).
 */
async function runInThread(
  start: DistributiveOmit<Extract<ToThread, { type: 'start' | 'stage' }>, 'id'>,
  source: AsyncIterable<Uint8Array>,
  handlers: Pick<Running, 'onProgress' | 'onStored'>,
): Promise<Finished> {
  const w = thread();
  const st = state();
  const id = st.nextId++;
  const done = new Promise<Finished>((resolve, reject) => {
    st.running.set(id, { ...handlers, resolve, reject, inFlight: 0, wake: null });
  });
  done.catch(() => undefined); // awaited below; not an unhandled rejection meanwhile
  w.ref(); // keep the process up while a task runs
  try {
    w.postMessage({ ...start, id } satisfies ToThread);
    try {
      for await (const chunk of source) {
        const r = st.running.get(id);
        if (!r) break; // the thread finished early (a refusal stops reading)
        const bytes = new Uint8Array(chunk); // a copy of our own to transfer
        r.inFlight += bytes.byteLength;
        w.postMessage({ type: 'chunk', id, bytes } satisfies ToThread, [bytes.buffer]);
        while (r.inFlight > IN_FLIGHT_BYTES && st.running.has(id)) await new Promise<void>((wake) => (r.wake = wake));
        r.wake = null;
      }
      if (st.running.has(id)) w.postMessage({ type: 'end', id } satisfies ToThread);
    } catch (error) {
      if (st.running.has(id)) w.postMessage({ type: 'fail', id, error: toThreadError(error) } satisfies ToThread);
    }
    return await done;
  } finally {
    if (st.running.size === 0) w.unref();
  }
}

type DistributiveOmit<T, K extends PropertyKey> = T extends unknown ? Omit<T, K> : never;

/**
 * `importSamples` in the import thread, on the database `database` (the one this process serves).
 * Resolves with the same outcome and rejects with the same kinds of error (refusal, outage, fault).
 * The refit of an applied import is announced here, to this process's fit queue.
 */
export async function importInThread(
  database: DatabaseConfig,
  scope: TeamScope,
  projectId: string,
  input: ThreadInput,
  source: AsyncIterable<Uint8Array>,
  options: { onProgress?: (progress: ImportProgress) => void } = {},
): Promise<ImportOutcome> {
  const finished = await runInThread({ type: 'start', database, teamId: scope.teamId, projectId, input }, source, { onProgress: options.onProgress });
  if (finished.type !== 'outcome') throw new Error(`the import thread answered an import with "${finished.type}"`);
  const outcome = finished.outcome;
  if (outcome.ok && outcome.fitId !== null && outcome.revisionNumber !== null) await announceRefit({ fitId: outcome.fitId, projectId, revisionNumber: outcome.revisionNumber });
  return outcome;
}

/**
 * `stageImport` in the import thread (PostgreSQL job system): the file into a new staged batch,
 * then `queued`. Same result and errors as calling it on this thread (a failed or abandoned upload
 * removes its batch). `onStored`: the bytes stored so far, after each chunk.
 */
export async function stageInThread(
  database: DatabaseConfig,
  scope: TeamScope,
  projectId: string,
  settings: StageSettings,
  userId: string | null,
  source: AsyncIterable<Uint8Array>,
  options: { onStored?: (bytes: number) => void } = {},
): Promise<StagedImport> {
  const finished = await runInThread({ type: 'stage', database, teamId: scope.teamId, projectId, settings, userId }, source, { onStored: options.onStored });
  if (finished.type !== 'staged') throw new Error(`the import thread answered a staging with "${finished.type}"`);
  return finished.staged;
}

/** Whether this process has started its import thread (diagnostics and tests). */
export function importThreadStarted(): boolean {
  return state().worker !== null;
}
