/**
 * Imports on the PostgreSQL job system (BORDERLINE_JOBS=job-system): the worker half.
 *
 * The request (staged.ts) streams the file into ImportChunk rows of a `staged` ImportBatch, marks
 * it `queued` and sends an `import` job. A worker (`npm run worker`) then, per job:
 *
 * 1. claims the batch: `queued` → `running` (or a `running` batch whose heartbeat went stale)
 *    with a compare-and-set on `heartbeatAt`; the value this worker wrote is its lease token.
 *    A batch already `applied` or `failed`, or held by a live worker, is skipped — a job
 *    delivered twice changes nothing.
 * 2. runs the same pipeline as an in-process import (`importSamples`) with the chunks, in `seq`
 *    order, as the byte source; scope: the batch's project's team; actor: the batch's creator.
 * 3. while it runs, renews the heartbeat and writes the latest progress (throttled) — each write
 *    again a compare-and-set on the token, so a worker that lost its lease notices;
 * 4. records the result in the apply transaction itself (status, history fields, outcome JSON,
 *    chunks deleted), conditional on the token. Samples, revision, history row and outcome commit
 *    together or not at all: a worker killed mid-import leaves nothing partial (its open
 *    transaction is rolled back by PostgreSQL when its connection closes).
 *
 * A sweep in every worker: re-queues `running` batches whose heartbeat is stale (killed worker)
 * and re-sends their job; re-sends `queued` batches idle for a lease period without a waiting job
 * (a lost message); removes `staged` batches whose upload stopped more than a grace period ago
 * (an app instance killed mid-upload; no sample was written). Faults are retried by pg-boss (the
 * `import` queue's retry limit); after the last attempt the batch fails with the generic message.
 */
import type PgBoss from 'pg-boss';
import { z } from 'zod';
import { IMPORT_MODES } from '../../domain-data';
import { mintTeamScope } from '../authz/scope';
import type { Db, DbTx } from '../db';
import { JOB_QUEUES, JOB_SCHEMA, sendImport, sendRefit, type ImportJobData } from '../jobs/boss';
import { wakeWorkersOnJob } from '../jobs/wake';
import { importSamples, type ImportOutcome, type ImportProgress } from './index';
import { ImportBatchLost, type HistoryRow, type ImportRecorder } from './record';

/** The import's settings as the request stored them in ImportBatch.options. */
export const StagedImportSettings = z.object({
  fileName: z.string(),
  mode: z.enum(IMPORT_MODES),
  featurePrefix: z.string().optional(),
  address: z.string().nullable(),
  /** Set when the upload is complete (status `queued`): the file's size and chunk count. */
  bytes: z.number().int().nonnegative().optional(),
  chunks: z.number().int().nonnegative().optional(),
});
export type StagedImportSettings = z.infer<typeof StagedImportSettings>;

/** ImportBatch.outcome: what the request answers. */
export type StoredOutcome = { kind: 'outcome'; outcome: ImportOutcome } | { kind: 'error'; status: number; error: string };

/** The answer of a worker that gave up on a fault (same text as the in-process import's). */
export const IMPORT_FAULT = 'Something went wrong on our side and nothing was imported. Try again in a moment.';

export interface ImportLeaseTiming {
  /** How often a running import renews its heartbeat. */
  readonly heartbeatMs: number;
  /** A running batch whose heartbeat is older than this is taken over (its worker died). */
  readonly staleMs: number;
}

export interface ImportJobWorkerOptions {
  readonly db: Db;
  readonly boss: PgBoss;
  readonly workerId: string;
  readonly lease: ImportLeaseTiming;
  readonly log?: (msg: string, fields?: Record<string, unknown>) => void;
  /** import jobs this process runs at once (default 1: an import is database-bound) */
  readonly concurrency?: number;
  /** how often the sweep runs (default a third of the lease, at least 1 s) */
  readonly sweepMs?: number;
  /** a `staged` batch whose last chunk is older than this is removed (default 10 minutes) */
  readonly stagedGraceMs?: number;
  /** least milliseconds between progress writes (default 250) */
  readonly progressMs?: number;
  /** pg-boss polling interval in seconds (default 0.5, pg-boss's minimum) */
  readonly pollingIntervalSeconds?: number;
  /** the database URL to listen on for announced jobs (lib/server/jobs/wake.ts); without it, polling only */
  readonly wakeUrl?: string;
  /** rows per INSERT statement (default: the import's own) */
  readonly batchSize?: number;
}

export interface ImportJobWorker {
  /** Stops taking jobs and stops the sweep (a running import finishes; pg-boss's stop waits for it). */
  stop(): Promise<void>;
}

export const STAGED_GRACE_MS = 10 * 60_000;

/** Registers this process as an import worker on the job system. */
export async function startImportJobWorker(options: ImportJobWorkerOptions): Promise<ImportJobWorker> {
  const { boss } = options;
  const workIds: string[] = [];
  for (let i = 0; i < (options.concurrency ?? 1); i++) {
    workIds.push(
      await boss.work<ImportJobData>(
        JOB_QUEUES.import,
        { batchSize: 1, pollingIntervalSeconds: options.pollingIntervalSeconds ?? 0.5, includeMetadata: true },
        async (jobs) => {
          for (const job of jobs) {
            const batchId = typeof job.data?.batchId === 'string' ? job.data.batchId : null;
            if (batchId === null) continue;
            await runImportJob(options, batchId, { lastAttempt: job.retryCount >= job.retryLimit });
          }
        },
      ),
    );
  }
  const wake = options.wakeUrl ? wakeWorkersOnJob(options.wakeUrl, boss, JOB_QUEUES.import, workIds, (line) => options.log?.(line)) : null;
  await wake?.ready;
  let sweeping: Promise<void> | null = null;
  const sweepTimer = setInterval(() => {
    sweeping ??= sweepImports(options)
      .then(() => undefined)
      .finally(() => {
      sweeping = null;
    });
  }, options.sweepMs ?? Math.max(1000, Math.floor(options.lease.staleMs / 3)));
  sweepTimer.unref?.();
  let stopped = false;
  const stop = async () => {
    if (stopped) return;
    stopped = true;
    clearInterval(sweepTimer);
    await wake?.stop();
    if (sweeping) await sweeping;
    for (const id of workIds) await boss.offWork({ id }).catch(() => undefined);
  };
  // The worker process stops pg-boss itself; the sweep stops with it.
  boss.once('stopped', () => void stop());
  await sweepImports(options);
  return { stop };
}

export type ImportJobResult = 'finished' | 'skipped' | 'lost' | 'retry' | 'failed';

/** One import job (idempotent): claim, import, record. Throws only to ask pg-boss for a retry. */
export async function runImportJob(options: ImportJobWorkerOptions, batchId: string, attempt: { lastAttempt: boolean } = { lastAttempt: false }): Promise<ImportJobResult> {
  const { db, workerId } = options;
  const log = options.log ?? (() => {});
  const claim = await claimBatch(db, batchId, options.lease.staleMs);
  if (claim.token === null) {
    log('import skipped', { batchId, status: claim.status });
    return 'skipped';
  }
  const lease = new BatchLease(db, batchId, claim.token, options.lease.heartbeatMs, options.progressMs ?? 250);
  log('import claimed', { batchId, worker: workerId });
  try {
    const batch = await db.importBatch.findUniqueOrThrow({
      where: { id: batchId },
      select: { projectId: true, createdById: true, options: true, project: { select: { teamId: true } } },
    });
    const settings = StagedImportSettings.parse(JSON.parse(batch.options ?? 'null'));
    if (settings.chunks === undefined) throw new Error(`import batch ${batchId} is queued without its chunk count`);
    const outcome = await importSamples(
      mintTeamScope(batch.project.teamId),
      batch.projectId,
      {
        source: readChunks(db, batchId, settings.chunks),
        fileName: settings.fileName,
        mode: settings.mode,
        featurePrefix: settings.featurePrefix,
        userId: batch.createdById,
        address: settings.address,
      },
      { client: db, recorder: lease.recorder(), onProgress: (p) => lease.progress(p), progressEveryMs: options.progressMs ?? 250, batchSize: options.batchSize },
    );
    log('import finished', { batchId, ok: outcome.ok, rows: outcome.rows, ...(outcome.ok ? { revision: outcome.revisionNumber, added: outcome.added } : { status: outcome.status }) });
    if (outcome.ok && outcome.revisionNumber !== null) {
      // This process has no in-process fit queue to announce to; the refit job goes out now.
      await sendRefit(options.boss, { projectId: batch.projectId, revisionNumber: outcome.revisionNumber }).catch(() => undefined);
    }
    return 'finished';
  } catch (error) {
    if (error instanceof ImportBatchLost) {
      log('import lost its lease', { batchId });
      return 'lost';
    }
    const status = refusalStatus(error);
    if (status === null && !attempt.lastAttempt) {
      // A fault (e.g. the database went away): give the batch back; pg-boss retries the job.
      await lease.release().catch(() => undefined);
      log('import fault; retrying', { level: 'error', batchId, error: error instanceof Error ? error.message : String(error) });
      throw error;
    }
    const stored: StoredOutcome =
      status === null ? { kind: 'error', status: 500, error: IMPORT_FAULT } : { kind: 'error', status, error: error instanceof Error ? error.message : IMPORT_FAULT };
    log('import failed', { level: 'error', batchId, status: stored.status, error: error instanceof Error ? error.message : String(error) });
    await lease.fail(stored).catch(() => undefined);
    return 'failed';
  } finally {
    lease.stop();
  }
}

/** An expected refusal's status (4xx thrown by the pipeline, e.g. the project was removed), or null. */
function refusalStatus(error: unknown): number | null {
  if (error && typeof error === 'object' && 'status' in error) {
    const s = (error as { status: unknown }).status;
    if (typeof s === 'number' && s >= 400 && s < 500) return s;
  }
  return null;
}

/** The next lease token: now, but always later than the previous one (so two tokens never match). */
function nextBeat(previous: Date | null): Date {
  const now = Date.now();
  return new Date(previous === null ? now : Math.max(now, previous.getTime() + 1));
}

/** Claims a batch for this worker; the token is the heartbeat it wrote, or null (with the status found). */
async function claimBatch(db: Db, batchId: string, staleMs: number): Promise<{ token: Date | null; status: string }> {
  const batch = await db.importBatch.findUnique({ where: { id: batchId }, select: { status: true, heartbeatAt: true } });
  if (batch === null) return { token: null, status: 'missing' };
  const stale = batch.heartbeatAt === null || batch.heartbeatAt.getTime() < Date.now() - staleMs;
  if (batch.status !== 'queued' && !(batch.status === 'running' && stale)) return { token: null, status: batch.status };
  const token = nextBeat(batch.heartbeatAt);
  const claimed = await db.importBatch.updateMany({
    where: { id: batchId, status: batch.status, heartbeatAt: batch.heartbeatAt },
    data: { status: 'running', heartbeatAt: token, progress: null },
  });
  return claimed.count === 1 ? { token, status: 'running' } : { token: null, status: `${batch.status} (taken meanwhile)` };
}

/**
 * The lease on a running batch: renews the heartbeat (with the latest progress) on a timer, each
 * write a compare-and-set on the previous token; `hold()` stops the timer before the final write.
 */
class BatchLease {
  #token: Date;
  #latest: ImportProgress | null = null;
  #dirty = false;
  #lastBeat = Date.now();
  #inflight: Promise<void> | null = null;
  #held = false;
  #lost = false;
  readonly #timer: NodeJS.Timeout;

  constructor(
    private readonly db: Db,
    private readonly batchId: string,
    token: Date,
    private readonly heartbeatMs: number,
    progressMs: number,
  ) {
    this.#token = token;
    this.#timer = setInterval(() => this.#tick(), Math.max(10, Math.min(progressMs, heartbeatMs)));
    this.#timer.unref?.();
  }

  progress(p: ImportProgress): void {
    this.#latest = p;
    this.#dirty = true;
  }

  #tick(): void {
    if (this.#held || this.#lost || this.#inflight !== null) return;
    if (!this.#dirty && Date.now() - this.#lastBeat < this.heartbeatMs) return;
    this.#inflight = this.#beat()
      .catch(() => undefined) // the next tick tries again; a stale lease is noticed at the end
      .finally(() => {
        this.#inflight = null;
      });
  }

  async #beat(): Promise<void> {
    const next = nextBeat(this.#token);
    const progress = this.#dirty && this.#latest !== null ? JSON.stringify(this.#latest) : undefined;
    this.#dirty = false;
    const done = await this.db.importBatch.updateMany({
      where: { id: this.batchId, status: 'running', heartbeatAt: this.#token },
      data: { heartbeatAt: next, ...(progress === undefined ? {} : { progress }) },
    });
    if (done.count === 1) {
      this.#token = next;
      this.#lastBeat = Date.now();
    } else {
      this.#lost = true;
      clearInterval(this.#timer);
    }
  }

  /** Stops the heartbeat and returns the current token (throws when the lease was lost). */
  async hold(): Promise<Date> {
    this.#held = true;
    clearInterval(this.#timer);
    if (this.#inflight) await this.#inflight;
    if (this.#lost) throw new ImportBatchLost(this.batchId);
    return this.#token;
  }

  /** Records the outcome with the history row (inside the apply transaction for an applied import). */
  recorder(): ImportRecorder {
    return {
      finish: async (client: DbTx, row: HistoryRow, outcome: (batchId: string) => ImportOutcome) => {
        const token = await this.hold();
        const result = outcome(this.batchId);
        const progress = result.ok ? JSON.stringify({ phase: 'done', bytes: this.#latest?.bytes ?? 0, rows: result.rows, written: result.rows } satisfies ImportProgress) : undefined;
        const stored: StoredOutcome = { kind: 'outcome', outcome: result };
        await this.#finishTx(client, token, { ...row, outcome: JSON.stringify(stored), ...(progress === undefined ? {} : { progress }) });
        return this.batchId;
      },
    };
  }

  async #finishTx(client: DbTx, token: Date, data: Record<string, unknown> & { status: string }): Promise<void> {
    const done = await client.importBatch.updateMany({ where: { id: this.batchId, status: 'running', heartbeatAt: token }, data });
    if (done.count !== 1) throw new ImportBatchLost(this.batchId);
    await client.importChunk.deleteMany({ where: { batchId: this.batchId } });
  }

  /** Ends the batch as failed with a stored error (an expected refusal, or the last attempt's fault). */
  async fail(stored: Extract<StoredOutcome, { kind: 'error' }>): Promise<void> {
    const token = await this.hold();
    await this.db.$transaction((tx) =>
      this.#finishTx(tx, token, { status: 'failed', error: stored.error.slice(0, 1000), finishedAt: new Date(), outcome: JSON.stringify(stored) }),
    );
  }

  /** Gives the batch back to the queue after a fault (the job is retried). */
  async release(): Promise<void> {
    const token = await this.hold();
    await this.db.importBatch.updateMany({
      where: { id: this.batchId, status: 'running', heartbeatAt: token },
      data: { status: 'queued', heartbeatAt: nextBeat(token) },
    });
  }

  stop(): void {
    this.#held = true;
    clearInterval(this.#timer);
  }
}

/**
 * The staged file: its chunks in `seq` order (the next one read while the current one is parsed).
 * Read as base64 text (PostgreSQL's encode): about three times faster than Prisma's own bytes
 * decoding of a 4 MB value (bench/import-job.ts).
 */
export async function* readChunks(db: Db, batchId: string, count: number): AsyncGenerator<Uint8Array> {
  const fetch = async (seq: number) => {
    const rows = await db.$queryRawUnsafe<{ data: string }[]>(
      `SELECT encode("data", 'base64') AS "data" FROM "ImportChunk" WHERE "batchId" = $1 AND "seq" = $2`,
      batchId,
      seq,
    );
    // Node's base64 decoder skips the line breaks PostgreSQL puts every 76 characters.
    return rows.length === 0 ? null : { data: Buffer.from(rows[0].data, 'base64') };
  };
  let next = count > 0 ? fetch(0) : null;
  for (let seq = 0; seq < count; seq++) {
    const chunk = await next;
    next = seq + 1 < count ? fetch(seq + 1) : null;
    // Keep a rejection of the prefetch from surfacing as unhandled before it is awaited.
    next?.catch(() => undefined);
    if (chunk === null || chunk === undefined) throw new Error(`import batch ${batchId}: chunk ${seq} of ${count} is missing`);
    yield chunk.data;
  }
}

/** The sweep (see the file's header). Never throws; returns what it did, for logs and tests. */
export async function sweepImports(options: ImportJobWorkerOptions, now: Date = new Date()): Promise<{ requeued: string[]; resent: string[]; removed: number }> {
  const { db, boss } = options;
  const log = options.log ?? (() => {});
  const staleBefore = new Date(now.getTime() - options.lease.staleMs);
  const out = { requeued: [] as string[], resent: [] as string[], removed: 0 };
  try {
    const stale = await db.importBatch.findMany({ where: { status: 'running', heartbeatAt: { lt: staleBefore } }, select: { id: true, heartbeatAt: true } });
    for (const b of stale) {
      const moved = await db.importBatch.updateMany({ where: { id: b.id, status: 'running', heartbeatAt: b.heartbeatAt }, data: { status: 'queued', heartbeatAt: nextBeat(b.heartbeatAt) } });
      if (moved.count !== 1) continue;
      await sendImport(boss, { batchId: b.id });
      out.requeued.push(b.id);
      log('import re-queued: its worker stopped answering', { batchId: b.id });
    }
    const idle = await db.importBatch.findMany({ where: { status: 'queued', heartbeatAt: { lt: staleBefore } }, select: { id: true, heartbeatAt: true } });
    for (const b of idle) {
      if (await hasWaitingJob(db, b.id)) continue;
      const bumped = await db.importBatch.updateMany({ where: { id: b.id, status: 'queued', heartbeatAt: b.heartbeatAt }, data: { heartbeatAt: nextBeat(b.heartbeatAt) } });
      if (bumped.count !== 1) continue;
      await sendImport(boss, { batchId: b.id });
      out.resent.push(b.id);
      log('import job sent again', { batchId: b.id });
    }
    const graceBefore = new Date(now.getTime() - (options.stagedGraceMs ?? STAGED_GRACE_MS));
    const removed = await db.importBatch.deleteMany({
      where: { status: 'staged', OR: [{ heartbeatAt: { lt: graceBefore } }, { heartbeatAt: null, createdAt: { lt: graceBefore } }] },
    });
    out.removed = removed.count;
    if (removed.count > 0) log('abandoned uploads removed', { count: removed.count });
  } catch (e) {
    log('import sweep failed', { level: 'error', error: e instanceof Error ? e.message : String(e) });
  }
  return out;
}

/** Whether pg-boss holds a job for the batch that has not started yet (created or waiting to retry). */
async function hasWaitingJob(db: Db, batchId: string): Promise<boolean> {
  const rows = await db.$queryRawUnsafe<{ n: bigint }[]>(
    `SELECT count(*) AS n FROM ${JOB_SCHEMA}.job WHERE name = $1 AND state IN ('created', 'retry') AND data->>'batchId' = $2`,
    JOB_QUEUES.import,
    batchId,
  );
  return Number(rows[0]?.n ?? 0) > 0;
}

