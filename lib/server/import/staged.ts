/**
 * Imports on the PostgreSQL job system: the request's half (the worker's is job.ts).
 *
 *   stageImport(client, scope, projectId, settings, source)  the file into ImportChunk rows of a
 *                                  new `staged` batch; then `queued` (one conditional update)
 *   queueImportJob(boss, batchId)  sends the `import` job (a lost send is re-sent by the sweep)
 *   waitForImport(client, batchId) relays the worker's progress and returns its stored outcome
 *
 * Nothing of the project changes while staging: the chunks are the file's bytes, not samples.
 * A request that fails or is abandoned mid-upload removes its batch; an app instance killed
 * mid-upload leaves a `staged` batch that the workers' sweep removes after its grace period.
 * Once `queued`, the import no longer depends on the request: it completes in a worker even if
 * the client goes away.
 */
import type PgBoss from 'pg-boss';
import { z } from 'zod';
import { notFound } from '../authz/errors';
import type { TeamScope } from '../authz/scope';
import type { Db } from '../db';
import { sendImport } from '../jobs/boss';
import { firstSignificantChar, type ImportOutcome, type ImportProgress } from './index';
import { StagedImportSettings, type StoredOutcome } from './job';

/** Bytes per ImportChunk row. */
export const STAGE_CHUNK_BYTES = 4 * 1024 * 1024;

export interface StageOptions {
  chunkBytes?: number;
  /** Called after each chunk is stored, with the bytes stored so far. */
  onStored?: (bytes: number, chunks: number) => void;
  /** How often a slow upload renews the batch's heartbeat between chunks (default 60 s). */
  keepAliveMs?: number;
}

export interface StagedImport {
  batchId: string;
  bytes: number;
  chunks: number;
}

/** Streams the file into a new staged batch, then marks it queued. Removes the batch on failure. */
export async function stageImport(
  client: Db,
  scope: TeamScope,
  projectId: string,
  settings: Omit<StagedImportSettings, 'bytes' | 'chunks'>,
  userId: string | null,
  source: AsyncIterable<Uint8Array>,
  options: StageOptions = {},
): Promise<StagedImport> {
  const project = await client.project.findFirst({ where: { id: projectId, teamId: scope.teamId }, select: { id: true } });
  if (project === null) throw notFound();
  const iterator = source[Symbol.asyncIterator]();
  const first = await iterator.next();
  const head = first.done ? new Uint8Array(0) : first.value;
  const sig = firstSignificantChar(head.subarray(0, 8192));
  const batch = await client.importBatch.create({
    data: {
      projectId,
      status: 'staged',
      fileName: settings.fileName,
      format: sig === '{' ? 'jsonl' : sig === null || sig === '[' ? 'unknown' : 'csv',
      mode: settings.mode,
      createdById: userId,
      options: JSON.stringify(settings),
      heartbeatAt: new Date(),
    },
    select: { id: true },
  });
  const chunkBytes = options.chunkBytes ?? STAGE_CHUNK_BYTES;
  let seq = 0;
  let stored = 0;
  let parts: Uint8Array[] = [];
  let size = 0;
  let pending: Promise<void> | null = null;
  // A function, so TypeScript does not narrow `pending` (assigned inside flush) to null.
  const settle = async () => {
    if (pending) await pending;
  };
  const keepAlive = setInterval(() => {
    void client.importBatch.updateMany({ where: { id: batch.id, status: 'staged' }, data: { heartbeatAt: new Date() } }).catch(() => undefined);
  }, options.keepAliveMs ?? 60_000);
  keepAlive.unref?.();

  // Writes one chunk while the next one is being received.
  const flush = async () => {
    if (size === 0) return;
    const data = new Uint8Array(size);
    let at = 0;
    for (const p of parts) {
      data.set(p, at);
      at += p.byteLength;
    }
    parts = [];
    size = 0;
    if (pending) await pending;
    const n = seq++;
    const write = async () => {
      await client.importChunk.create({ data: { batchId: batch.id, seq: n, data }, select: { id: true } });
      await client.importBatch.update({ where: { id: batch.id }, data: { heartbeatAt: new Date() }, select: { id: true } });
      stored += data.byteLength;
      options.onStored?.(stored, n + 1);
    };
    pending = write();
    pending.catch(() => undefined);
  };

  try {
    if (!first.done) {
      parts.push(head);
      size += head.byteLength;
    }
    for (;;) {
      if (size >= chunkBytes) await flush();
      const next = await iterator.next();
      if (next.done) break;
      parts.push(next.value);
      size += next.value.byteLength;
    }
    await flush();
    await settle();
    const queued = await client.importBatch.updateMany({
      where: { id: batch.id, status: 'staged' },
      data: { status: 'queued', heartbeatAt: new Date(), options: JSON.stringify({ ...settings, bytes: stored, chunks: seq }) },
    });
    if (queued.count !== 1) throw new Error(`import batch ${batch.id} was removed while its upload was being stored`);
    return { batchId: batch.id, bytes: stored, chunks: seq };
  } catch (error) {
    await settle().catch(() => undefined);
    await client.importBatch.deleteMany({ where: { id: batch.id, status: 'staged' } }).catch(() => undefined);
    throw error;
  } finally {
    clearInterval(keepAlive);
  }
}

/** Sends the batch's job. A failed send is logged, not thrown: the workers' sweep sends it again. */
export async function queueImportJob(boss: PgBoss, batchId: string): Promise<void> {
  try {
    await sendImport(boss, { batchId });
  } catch (error) {
    console.error('[import] could not send the import job; a worker will pick the batch up at its next sweep', error);
  }
}

const ProgressJson = z.object({
  phase: z.enum(['reading', 'writing', 'done']),
  bytes: z.number(),
  rows: z.number(),
  written: z.number(),
});

const OutcomeJson = z.union([
  z.object({ kind: z.literal('outcome'), outcome: z.custom<ImportOutcome>((v) => typeof v === 'object' && v !== null && 'ok' in v) }),
  z.object({ kind: z.literal('error'), status: z.number().int(), error: z.string() }),
]);

export interface WaitOptions {
  pollMs?: number;
  onProgress?: (progress: ImportProgress) => void;
  /** Stops waiting (the client went away); the import carries on in the worker. */
  signal?: AbortSignal;
  /** Consecutive failed polls tolerated before giving up (default 40, ~10 s). */
  maxPollFailures?: number;
}

/**
 * Polls the batch until the worker stored its outcome; relays each new progress report. Returns
 * null when `signal` stopped the wait. A batch that disappeared (its project was removed) reads as
 * not found.
 */
export async function waitForImport(client: Db, batchId: string, options: WaitOptions = {}): Promise<StoredOutcome | null> {
  const pollMs = options.pollMs ?? 250;
  let lastProgress: string | null = null;
  let failures = 0;
  for (;;) {
    if (options.signal?.aborted) return null;
    let batch: { progress: string | null; outcome: string | null } | null;
    try {
      batch = await client.importBatch.findUnique({ where: { id: batchId }, select: { progress: true, outcome: true } });
      failures = 0;
    } catch (error) {
      if (++failures > (options.maxPollFailures ?? 40)) throw error;
      await sleep(pollMs, options.signal);
      continue;
    }
    if (batch === null) return { kind: 'error', status: 404, error: notFound().message };
    if (batch.progress !== null && batch.progress !== lastProgress) {
      lastProgress = batch.progress;
      const p = ProgressJson.safeParse(JSON.parse(batch.progress));
      if (p.success) options.onProgress?.(p.data);
    }
    if (batch.outcome !== null) return OutcomeJson.parse(JSON.parse(batch.outcome));
    await sleep(pollMs, options.signal);
  }
}

function sleep(ms: number, signal?: AbortSignal): Promise<void> {
  return new Promise((resolve) => {
    const timer = setTimeout(done, ms);
    function done() {
      clearTimeout(timer);
      signal?.removeEventListener('abort', done);
      resolve();
    }
    signal?.addEventListener('abort', done, { once: true });
  });
}
