/**
 * Import of samples into a project from CSV (RFC 4180) or JSON Lines — the service behind the
 * Data screen's upload and the pipeline API.
 *
 *   importSamples(scope, projectId, { source, fileName, mode, featurePrefix, uploadBatch, userId }, { onProgress })
 *
 * 1. Read: the byte stream is decoded as UTF-8 (refused with its line and offset otherwise),
 *    the format is recognised from the content (`{` → JSON Lines; a JSON array, binary files,
 *    UTF-16 and text without commas are refused), records are parsed as they arrive.
 * 2. Validate every row before anything is written; valid rows go to a spool file on disk, so
 *    memory stays flat however large the file. The first problems (MAX_PROBLEMS) are reported,
 *    each naming its row and column; then reading stops.
 * 3. Apply: only when the whole file is valid, in one database transaction (see apply.ts). A
 *    new revision is made and a refit requested when samples were added or changed.
 *
 * A refused import is recorded in the import history as a failed batch (with its first
 * problem); the project's samples, classes, revisions and fits are untouched.
 */
import { databaseOutage } from '../db-outage';
import { sniffBinary } from '../../data-columns';
import { DATA_LIMITS, type ImportFormat, type ImportMode } from '../../domain-data';
import { recordAudit } from '../auth/audit';
import { notFound } from '../authz/errors';
import type { TeamScope } from '../authz/scope';
import { db, type Db } from '../db';
import { serialWrite } from '../queue/tx';
import { announceRefit } from '../refit-request';
import { applyImport, type ApplyResult } from './apply';
import { DETAIL, FatalImportProblem, MAX_PROBLEMS, problemAt, type ImportProblem } from './problems';
import { readCsv, readLines } from './readers';
import { ImportBatchLost, newBatchRecorder, type HistoryRow, type ImportRecorder } from './record';
import { SpoolWriter } from './spool';
import { discardUploadBatch, imageResolver } from './uploads';
import { decodeUtf8 } from './utf8';
import { RowValidator, type ProjectFacts } from './validate';

export type { ImportProblem } from './problems';
export { MAX_PROBLEMS } from './problems';

export interface ImportInput {
  /** The file's bytes as they arrive (a web ReadableStream, a Node stream, a generator …). */
  source: AsyncIterable<Uint8Array>;
  fileName: string;
  mode: ImportMode;
  /** When set, only columns (JSON Lines: fields) starting with it are features. */
  featurePrefix?: string;
  /** Upload batch of images sent with this import (see uploads.ts). */
  uploadBatch?: string;
  /** Who imports (null for a pipeline token without a user). */
  userId: string | null;
  address?: string | null;
}

export type ImportPhase = 'reading' | 'writing' | 'done';

export interface ImportProgress {
  phase: ImportPhase;
  /** Bytes of the file read so far. */
  bytes: number;
  /** Data rows read so far. */
  rows: number;
  /** Rows written to the database so far (phase `writing`). */
  written: number;
}

export interface ImportOptions {
  onProgress?: (progress: ImportProgress) => void;
  /** Minimum milliseconds between progress calls (default 200). */
  progressEveryMs?: number;
  maxProblems?: number;
  client?: Db;
  /** Rows per database statement (default 1000). */
  batchSize?: number;
  /** Writes the import-history row (default: a new row; the job system updates its staged batch). */
  recorder?: ImportRecorder;
}

export type ImportOutcome =
  | ({
      ok: true;
      format: ImportFormat;
      fileName: string;
      mode: ImportMode;
      rows: number;
      newClasses: string[];
    } & ApplyResult)
  | {
      ok: false;
      /** 400: the file is refused; 409: a concurrent change, nothing imported. */
      status: 400 | 409;
      batchId: string | null;
      format: ImportFormat | null;
      fileName: string;
      rows: number;
      problems: ImportProblem[];
      /** True when there were more problems than listed. */
      truncated: boolean;
    };

/** The facts of a project that validation needs; throws 404 outside the scope. */
export async function loadProjectFacts(client: Db, scope: TeamScope, projectId: string): Promise<ProjectFacts> {
  const project = await client.project.findFirst({
    where: { id: projectId, teamId: scope.teamId },
    select: { featureCount: true, maxClasses: true, _count: { select: { samples: true } } },
  });
  if (project === null) throw notFound();
  const classes = await client.projectClass.findMany({
    where: { projectId },
    orderBy: { position: 'asc' },
    select: { name: true },
  });
  const existingIds = new Set<string>();
  const page = 20_000;
  let cursor: string | undefined;
  for (;;) {
    const rows = await client.sample.findMany({
      where: { projectId },
      select: { id: true, externalId: true },
      orderBy: { id: 'asc' },
      take: page,
      ...(cursor === undefined ? {} : { cursor: { id: cursor }, skip: 1 }),
    });
    for (const r of rows) existingIds.add(r.externalId);
    if (rows.length < page) break;
    cursor = rows[rows.length - 1].id;
  }
  return {
    featureCount: project._count.samples === 0 && project.featureCount <= 0 ? 0 : project.featureCount,
    maxClasses: project.maxClasses,
    classNames: classes.map((c) => c.name),
    existingIds,
  };
}

/** Reads the first bytes (up to `want`) and returns them with a stream that replays them. */
async function peekBytes(source: AsyncIterable<Uint8Array>, want: number): Promise<{ head: Uint8Array; rest: AsyncIterable<Uint8Array> }> {
  const iterator = source[Symbol.asyncIterator]();
  const chunks: Uint8Array[] = [];
  let size = 0;
  let done = false;
  while (size < want) {
    const next = await iterator.next();
    if (next.done) {
      done = true;
      break;
    }
    const c = next.value instanceof Uint8Array ? next.value : new Uint8Array(next.value);
    chunks.push(c);
    size += c.byteLength;
  }
  const head = new Uint8Array(size);
  let at = 0;
  for (const c of chunks) {
    head.set(c, at);
    at += c.byteLength;
  }
  async function* replay(): AsyncGenerator<Uint8Array> {
    for (const c of chunks) yield c;
    if (done) return;
    for (;;) {
      const next = await iterator.next();
      if (next.done) return;
      yield next.value instanceof Uint8Array ? next.value : new Uint8Array(next.value);
    }
  }
  return { head, rest: replay() };
}

const PEEK_BYTES = 8192;

/** The first character that is not a byte-order mark or white space (ASCII), or null. */
export function firstSignificantChar(head: Uint8Array): string | null {
  let i = head[0] === 0xef && head[1] === 0xbb && head[2] === 0xbf ? 3 : 0;
  for (; i < head.length; i++) {
    const b = head[i];
    if (b === 0x20 || b === 0x09 || b === 0x0a || b === 0x0d) continue;
    return String.fromCharCode(b);
  }
  return null;
}

export async function importSamples(
  scope: TeamScope,
  projectId: string,
  input: ImportInput,
  options: ImportOptions = {},
): Promise<ImportOutcome> {
  const client = options.client ?? db();
  const maxProblems = options.maxProblems ?? MAX_PROBLEMS;
  const recorder = options.recorder ?? newBatchRecorder;
  const facts = await loadProjectFacts(client, scope, projectId);
  const validator = new RowValidator(facts, {
    mode: input.mode,
    featurePrefix: input.featurePrefix,
    maxProblems,
    resolveImage: imageResolver(projectId, input.uploadBatch),
  });

  const every = options.progressEveryMs ?? 200;
  let bytes = 0;
  let lastReport = 0;
  const report = (phase: ImportPhase, written: number, force = false) => {
    if (!options.onProgress) return;
    const now = Date.now();
    if (!force && now - lastReport < every) return;
    lastReport = now;
    options.onProgress({ phase, bytes, rows: validator.rows, written });
  };

  let format: ImportFormat | null = null;
  const fatal: ImportProblem[] = [];
  const spool = await SpoolWriter.create();
  try {
    try {
      const { head, rest } = await peekBytes(input.source, PEEK_BYTES);
      const binary = head.length === 0 ? null : sniffBinary(head);
      if (head.length === 0) throw new FatalImportProblem(problemAt({ row: null, column: null, kind: 'csv' }, DETAIL.emptyFile));
      if (binary !== null) throw new FatalImportProblem({ row: null, column: null, message: binary });
      const first = firstSignificantChar(head);
      if (first === null && head.length < PEEK_BYTES) {
        throw new FatalImportProblem(problemAt({ row: null, column: null, kind: 'csv' }, DETAIL.emptyFile));
      }
      if (first === '[') throw new FatalImportProblem(problemAt({ row: null, column: null, kind: 'jsonl' }, DETAIL.jsonArrayFile));
      format = first === '{' ? 'jsonl' : 'csv';
      const onBytes = (total: number) => {
        bytes = total;
      };

      if (format === 'csv') {
        let header = true;
        for await (const record of readCsv(decodeUtf8(rest, onBytes), DATA_LIMITS.record)) {
          if (header) {
            validator.csvHeader(record);
            header = false;
            continue;
          }
          const staged = validator.csvRow(record);
          if (staged !== null && validator.ok) await spool.add(staged);
          if (validator.full) break;
          if ((validator.rows & 255) === 0) report('reading', 0);
        }
      } else {
        for await (const line of readLines(decodeUtf8(rest, onBytes), DATA_LIMITS.record)) {
          const staged = validator.jsonRow(line);
          if (staged !== null && validator.ok) await spool.add(staged);
          if (validator.full) break;
          if ((validator.rows & 255) === 0) report('reading', 0);
        }
      }
      if (!validator.full) validator.finish(format);
    } catch (error) {
      if (!(error instanceof FatalImportProblem)) throw error;
      if (!validator.problems.includes(error.problem)) fatal.push(error.problem);
    }
    report('reading', 0, true);

    const problems = [...validator.problems, ...fatal].slice(0, maxProblems);
    if (problems.length > 0) {
      const truncated = validator.truncated || validator.problems.length + fatal.length > maxProblems || validator.full;
      const refused = (batchId: string | null): ImportOutcome => ({
        ok: false,
        status: 400,
        batchId,
        format,
        fileName: input.fileName,
        rows: validator.rows,
        problems,
        truncated,
      });
      const batchId = await recordFailure(client, scope, projectId, input, recorder, format, validator.rows, problems[0].message, refused);
      await discardUploadBatch(projectId, input.uploadBatch);
      return refused(batchId);
    }
    await spool.close();
    const resolvedFormat: ImportFormat = format ?? 'csv';
    const succeeded = (applied: Omit<ApplyResult, 'batchId'>) => ({
      ok: true as const,
      format: resolvedFormat,
      fileName: input.fileName,
      mode: input.mode,
      rows: validator.rows,
      newClasses: [...validator.newClasses],
      ...applied,
    });

    report('writing', 0, true);
    let result: ApplyResult;
    try {
      result = await applyImport(
        client,
        scope,
        {
          projectId,
          mode: input.mode,
          format: resolvedFormat,
          fileName: input.fileName,
          userId: input.userId,
          spoolPath: spool.path,
          rowCount: spool.count,
          featureCount: validator.featureCount,
          adoptFeatureCount: facts.featureCount === 0,
          newClasses: validator.newClasses,
          address: input.address ?? null,
        },
        {
          batchSize: options.batchSize,
          onWritten: (n) => report('writing', n),
          finish: (tx, row, applied) => recorder.finish(tx, row, (batchId) => ({ ...succeeded(applied), batchId })),
        },
      );
    } catch (error) {
      const refusal = conflictMessage(error);
      if (refusal === null) throw error;
      const problem: ImportProblem = { row: null, column: null, message: refusal };
      const refused = (batchId: string | null): ImportOutcome => ({
        ok: false,
        status: 409,
        batchId,
        format: resolvedFormat,
        fileName: input.fileName,
        rows: validator.rows,
        problems: [problem],
        truncated: false,
      });
      const batchId = await recordFailure(client, scope, projectId, input, recorder, resolvedFormat, validator.rows, refusal, refused);
      return refused(batchId);
    }
    if (result.fitId !== null && result.revisionNumber !== null) {
      await announceRefit({ fitId: result.fitId, projectId, revisionNumber: result.revisionNumber });
    }
    report('done', spool.count, true);
    return { ...succeeded(result), batchId: result.batchId };
  } finally {
    await spool.dispose();
  }
}

const CONCURRENT_CHANGE = 'Another change to this project was saved while the file was being imported. Nothing was imported; try again.';
const DATABASE_BUSY = 'The database is busy writing another change. Nothing was imported; try again in a moment.';

/** The message for an expected refusal during the write (conflicts), or null for faults. */
function conflictMessage(error: unknown): string | null {
  if (error && typeof error === 'object' && 'status' in error && (error as { status: unknown }).status === 409) {
    return error instanceof Error ? error.message : CONCURRENT_CHANGE;
  }
  const code = error && typeof error === 'object' && 'code' in error ? (error as { code: unknown }).code : null;
  if (code === 'P2002' || code === 'P2034') return CONCURRENT_CHANGE;
  // P1008: the database did not let the transaction write in time (SQLite: another writer holds
  // the lock beyond the busy timeout).
  if (code === 'P1008' || databaseOutage(error) === 'busy') return DATABASE_BUSY;
  return null;
}

async function recordFailure(
  client: Db,
  scope: TeamScope,
  projectId: string,
  input: ImportInput,
  recorder: ImportRecorder,
  format: ImportFormat | null,
  rows: number,
  message: string,
  outcome: (batchId: string) => ImportOutcome,
): Promise<string | null> {
  const row: HistoryRow = {
    projectId,
    status: 'failed',
    fileName: input.fileName,
    format: format ?? 'unknown',
    mode: input.mode,
    rowCount: rows,
    revisionNumber: null,
    error: message.slice(0, 1000),
    createdById: input.userId,
    finishedAt: new Date(),
  };
  try {
    return await serialWrite(client, () => client.$transaction(async (tx) => {
      const batchId = await recorder.finish(tx, row, outcome);
      await recordAudit(tx, {
        action: 'import.failed',
        teamId: scope.teamId,
        userId: input.userId,
        targetType: 'project',
        targetId: projectId,
        detail: { batchId, rows, mode: input.mode },
        address: input.address ?? null,
      });
      return batchId;
    }));
  } catch (error) {
    if (error instanceof ImportBatchLost) throw error;
    // The project may have been removed meanwhile; the refusal itself still stands.
    console.error('[import] could not record a failed import', error);
    return null;
  }
}
