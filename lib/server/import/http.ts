/**
 * HTTP glue of the import: request bodies as byte streams, and the two ways of answering.
 *
 * - The Data screen's upload (`importProgressResponse`) answers at once with a stream of JSON
 *   lines while the file is still arriving: `{"type":"progress",…}` lines during reading and
 *   writing, then one `{"type":"result","outcome":…}` (or `{"type":"error",…}` for a fault).
 * - The pipeline API (`importJsonResponse`) answers once, with a status a script can test:
 *   200 imported, 400 refused (problems listed), 409 concurrent change.
 */
import { databaseOutage } from '../db-outage';
import { log } from '../log';
import { DATA_LIMITS } from '../../domain-data';
import { badRequest, conflict, notFound, tooLarge } from '../authz/errors';
import type { TeamScope } from '../authz/scope';
import { db } from '../db';
import { env } from '../env';
import { appJobSystem } from '../jobs/app';
import { importSamples, type ImportInput, type ImportOutcome, type ImportProgress } from './index';
import type { StoredOutcome } from './job';
import { queueImportJob, waitForImport } from './staged';
import { importInThread, stageInThread } from './thread';

/**
 * Files at least this large go through the job system when it is on (BORDERLINE_JOBS=job-system,
 * PostgreSQL), else through this process's import thread (thread.ts: off the thread that answers
 * requests); smaller ones import on the request's thread — a round trip would cost more than the
 * import. Images uploaded with an import live on this instance's disk, so such an import stays
 * in this process (in its import thread).
 */
export const JOB_IMPORT_MIN_BYTES = 1024 * 1024;

interface RunOptions {
  onProgress?: (progress: ImportProgress) => void;
  /** The client went away: stop relaying (a queued import still completes in a worker). */
  signal?: AbortSignal;
}

/**
 * Runs an import from a request body: a small file on this thread; a large one in this process's
 * import thread, or — with the job system on — staged into the database and applied by a worker,
 * relaying its progress. Every way the outcome (or the error thrown) is the same for the same file.
 */
export async function runRequestImport(
  scope: TeamScope,
  projectId: string,
  input: Omit<ImportInput, 'source'>,
  req: Request,
  options: RunOptions = {},
): Promise<ImportOutcome> {
  const bytes = requestBytes(req);
  const inProcess = (source: AsyncIterable<Uint8Array>) =>
    importSamples(scope, projectId, { ...input, source }, options.onProgress ? { onProgress: options.onProgress, progressEveryMs: 250 } : {});
  const head = await readHead(bytes, JOB_IMPORT_MIN_BYTES);
  if (head.ended) return inProcess(head.source);
  if (env().jobs !== 'job-system' || input.uploadBatch !== undefined) {
    return importInThread(env().database, scope, projectId, input, head.source, { onProgress: options.onProgress });
  }
  return importThroughJobSystem(scope, projectId, input, head.source, options);
}

async function importThroughJobSystem(
  scope: TeamScope,
  projectId: string,
  input: Omit<ImportInput, 'source'>,
  source: AsyncIterable<Uint8Array>,
  options: RunOptions,
): Promise<ImportOutcome> {
  const boss = await appJobSystem();
  const client = db();
  let lastReport = 0;
  // Staged in the import thread: the chunk writes stay off the thread that answers reviewers.
  const staged = await stageInThread(
    env().database,
    scope,
    projectId,
    { fileName: input.fileName, mode: input.mode, featurePrefix: input.featurePrefix, address: input.address ?? null },
    input.userId,
    source,
    {
      onStored: (stored) => {
        const now = Date.now();
        if (now - lastReport < 250) return;
        lastReport = now;
        options.onProgress?.({ phase: 'reading', bytes: stored, rows: 0, written: 0 });
      },
    },
  );
  await queueImportJob(boss, staged.batchId);
  const stored = await waitForImport(client, staged.batchId, { onProgress: options.onProgress, signal: options.signal });
  if (stored === null) throw new Error('the client went away; the import continues in a worker');
  return outcomeOf(stored);
}

/** The stored outcome as the in-process import would have ended: its outcome, or its error. */
function outcomeOf(stored: StoredOutcome): ImportOutcome {
  if (stored.kind === 'outcome') return stored.outcome;
  switch (stored.status) {
    case 400:
      throw badRequest(stored.error);
    case 404:
      throw notFound();
    case 409:
      throw conflict(stored.error);
    case 413:
      throw tooLarge(stored.error);
    default:
      throw new Error(`import worker fault: ${stored.error}`);
  }
}

/**
 * Reads up to `want` bytes. `ended`: the body was shorter; `source` replays what was read, then
 * the rest.
 */
async function readHead(source: AsyncIterable<Uint8Array>, want: number): Promise<{ ended: boolean; source: AsyncIterable<Uint8Array> }> {
  const iterator = source[Symbol.asyncIterator]();
  const chunks: Uint8Array[] = [];
  let size = 0;
  let ended = false;
  while (size < want) {
    const next = await iterator.next();
    if (next.done) {
      ended = true;
      break;
    }
    chunks.push(next.value);
    size += next.value.byteLength;
  }
  async function* replay(): AsyncGenerator<Uint8Array> {
    yield* chunks;
    if (ended) return;
    for (;;) {
      const next = await iterator.next();
      if (next.done) return;
      yield next.value;
    }
  }
  return { ended, source: replay() };
}

/** The request body as bytes, refusing more than `limit` bytes. */
export async function* requestBytes(req: Request, limit: number = DATA_LIMITS.importBytes): AsyncGenerator<Uint8Array> {
  if (req.body === null) throw badRequest('The request has no file in its body.');
  const declared = Number(req.headers.get('content-length') ?? '0');
  if (declared > limit) throw tooLarge(`The file is larger than ${formatBytes(limit)}.`);
  const reader = req.body.getReader();
  let total = 0;
  try {
    for (;;) {
      const { done, value } = await reader.read();
      if (done) return;
      total += value.byteLength;
      if (total > limit) throw tooLarge(`The file is larger than ${formatBytes(limit)}.`);
      yield value;
    }
  } finally {
    reader.releaseLock();
  }
}

export function formatBytes(n: number): string {
  if (n >= 1024 ** 3) return `${(n / 1024 ** 3).toFixed(n % 1024 ** 3 === 0 ? 0 : 1)} GB`;
  if (n >= 1024 ** 2) return `${(n / 1024 ** 2).toFixed(n % 1024 ** 2 === 0 ? 0 : 1)} MB`;
  return `${n} bytes`;
}

export type ImportStreamLine =
  | { type: 'progress'; phase: 'reading' | 'writing' | 'done'; bytes: number; rows: number; written: number }
  | { type: 'result'; outcome: ImportOutcome }
  | { type: 'error'; status: number; error: string };

const FAULT = 'Something went wrong on our side and nothing was imported. Try again in a moment.';
const OUTAGE = 'The database is not answering right now, so nothing was imported; try again in a moment.';

/** Runs the import and answers with JSON lines of progress, then the outcome. */
export function importProgressResponse(scope: TeamScope, projectId: string, input: Omit<ImportInput, 'source'>, req: Request): Response {
  const encoder = new TextEncoder();
  // The browser went away: stop relaying a job-system import (the worker still completes it).
  const gone = new AbortController();
  const stream = new ReadableStream<Uint8Array>({
    start(controller) {
      let open = true;
      const send = (line: ImportStreamLine) => {
        if (!open) return;
        try {
          controller.enqueue(encoder.encode(`${JSON.stringify(line)}\n`));
        } catch {
          open = false; // the browser went away; the import itself carries on or fails whole
          gone.abort();
        }
      };
      void (async () => {
        try {
          const outcome = await runRequestImport(scope, projectId, input, req, {
            onProgress: (p) => send({ type: 'progress', ...p }),
            signal: gone.signal,
          });
          send({ type: 'result', outcome });
        } catch (error) {
          const outage = databaseOutage(error);
          const status = outage ? 503 : errorStatus(error);
          if (outage) log.warn('database unavailable', { endpoint: 'import', outage });
          else if (status === 500) log.error('import failed', { error: error instanceof Error ? (error.stack ?? error.message) : String(error) });
          const message = outage ? OUTAGE : status === 500 ? FAULT : error instanceof Error ? error.message : FAULT;
          send({ type: 'error', status, error: message });
        } finally {
          if (open) {
            open = false;
            try {
              controller.close();
            } catch {
              // already closed by a cancelled response
            }
          }
        }
      })();
    },
    cancel() {
      gone.abort();
    },
  });
  return new Response(stream, {
    status: 200,
    headers: {
      'content-type': 'application/x-ndjson; charset=utf-8',
      'cache-control': 'no-store',
      'x-accel-buffering': 'no',
      'x-content-type-options': 'nosniff',
    },
  });
}

function errorStatus(error: unknown): number {
  if (error && typeof error === 'object' && 'status' in error) {
    const s = (error as { status: unknown }).status;
    if (typeof s === 'number' && s >= 400 && s < 500) return s;
  }
  return 500;
}

/** Runs the import and answers once with JSON (pipeline API). */
export async function importJsonResponse(scope: TeamScope, projectId: string, input: Omit<ImportInput, 'source'>, req: Request): Promise<Response> {
  const outcome = await runRequestImport(scope, projectId, input, req, { signal: req.signal });
  const headers = { 'content-type': 'application/json; charset=utf-8', 'cache-control': 'no-store' };
  if (outcome.ok) {
    const { ok, format, rows, added, relabelled, updated, unchanged, revisionNumber, fitId, newClasses, batchId, mode } = outcome;
    return new Response(
      JSON.stringify({ ok, batchId, format, mode, rows, added, relabelled, updated, unchanged, newClasses, revision: revisionNumber, fitId }),
      { status: 200, headers },
    );
  }
  return new Response(
    JSON.stringify({ ok: false, error: outcome.problems[0]?.message ?? 'The file was refused.', problems: outcome.problems, truncated: outcome.truncated }),
    { status: outcome.status, headers },
  );
}
