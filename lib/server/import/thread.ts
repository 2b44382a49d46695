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
 * Protocol (ids per import):
 *   → { type: 'start', id, database, teamId, projectId, input }
 *   → { type: 'chunk', id, bytes }   (buffer transferred)   ← { type: 'read', id, bytes }
 *   → { type: 'end', id } | { type: 'fail', id, error }   (the body could not be read)
 *   ← { type: 'progress', id, progress }
 *   ← { type: 'outcome', id, outcome } | { type: 'error', id, error: ThreadError }
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
  | { type: 'chunk'; id: number; bytes: Uint8Array }
  | { type: 'end'; id: number }
  | { type: 'fail'; id: number; error: ThreadError };

export type FromThread =
  | { type: 'read'; id: number; bytes: number }
  | { type: 'progress'; id: number; progress: ImportProgress }
  | { type: 'outcome'; id: number; outcome: ImportOutcome }
  | { type: 'error'; id: number; error: ThreadError };

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
  readonly resolve: (outcome: ImportOutcome) => void;
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
    } else {
      st.running.delete(m.id);
      r.wake?.();
      if (m.type === 'outcome') r.resolve(m.outcome);
      else r.reject(fromThreadError(m.error));
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
  const w = thread();
  const st = state();
  const id = st.nextId++;
  const done = new Promise<ImportOutcome>((resolve, reject) => {
    st.running.set(id, { onProgress: options.onProgress, resolve, reject, inFlight: 0, wake: null });
  });
  done.catch(() => undefined); // awaited below; not an unhandled rejection meanwhile
  w.ref(); // keep the process up while an import runs
  try {
    w.postMessage({ type: 'start', id, database, teamId: scope.teamId, projectId, input } satisfies ToThread);
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
    const outcome = await done;
    if (outcome.ok && outcome.fitId !== null && outcome.revisionNumber !== null) await announceRefit({ fitId: outcome.fitId, projectId, revisionNumber: outcome.revisionNumber });
    return outcome;
  } finally {
    if (st.running.size === 0) w.unref();
  }
}

/** Whether this process has started its import thread (diagnostics and tests). */
export function importThreadStarted(): boolean {
  return state().worker !== null;
}
