/**
 * Writes a validated import into the database in ONE transaction: the new revision, new
 * classes, the samples (inserted, or updated in update mode with a LabelChange per changed
 * label), the project's revision counter, the queued fit and the ImportBatch record. Either all
 * of it commits or none of it does — also when the process dies half-way, because the
 * database discards an unfinished transaction (SQLite's journal, PostgreSQL's closed session).
 *
 * New samples go in with one set-based INSERT … SELECT per batch whose rows travel as a single
 * JSON parameter (SQLite json_each, PostgreSQL json_array_elements): per-parameter overhead of
 * the driver adapter, not the database, is what limits row-by-row and multi-VALUES inserts.
 */
import { randomBytes } from 'node:crypto';
import type { ImportFormat, ImportMode } from '../../domain-data';
import { conflict, notFound } from '../authz/errors';
import type { TeamScope } from '../authz/scope';
import { providerOf, serialWrite } from '../queue/tx';
import type { Db, DbTx } from '../db';
import { recordAudit } from '../auth/audit';
import { requestRefit } from '../refit-request';
import { createHistoryRow, type HistoryRow } from './record';
import { readSpool, type StagedRow } from './spool';

export type Dialect = 'sqlite' | 'postgresql';

/**
 * Most values in one `IN (…)` list: the SQLite driver adapter refuses queries with more than
 * 999 bound parameters (the classic SQLITE_MAX_VARIABLE_NUMBER), so lookups go in chunks.
 */
export const IN_LIST_LIMIT = 500;

/** Which database a client talks to. */
export async function dialectOf(client: Db): Promise<Dialect> {
  // The generated client knows its provider; probing with a SQLite-only query would log a
  // database error on PostgreSQL.
  return providerOf(client);
}

/** A fresh opaque row id (same alphabet as the schema's cuid ids). */
export function newRowId(): string {
  return `c${randomBytes(12).toString('hex')}`;
}

export interface ApplyInput {
  projectId: string;
  mode: ImportMode;
  format: ImportFormat;
  fileName: string;
  userId: string | null;
  spoolPath: string;
  rowCount: number;
  /** Feature count the rows were validated against, and whether the project takes it now. */
  featureCount: number;
  adoptFeatureCount: boolean;
  /** Labels not in the class list when the file was read. */
  newClasses: readonly string[];
  address?: string | null;
}

export interface ApplyResult {
  batchId: string;
  revisionNumber: number | null;
  fitId: string | null;
  added: number;
  relabelled: number;
  /** Existing samples whose features, text, image or metadata changed (label unchanged). */
  updated: number;
  unchanged: number;
  classesAdded: number;
}

export interface ApplyOptions {
  batchSize?: number;
  onWritten?: (rows: number) => void;
  /** Transaction timeout (ms). */
  timeoutMs?: number;
  /**
   * Writes the history row of the applied import (inside the transaction) and returns the batch
   * id; default: a new ImportBatch row. `result` is what the import returns, batch id aside.
   */
  finish?: (client: DbTx, row: HistoryRow, result: Omit<ApplyResult, 'batchId'>) => Promise<string>;
}


/** Thrown inside the transaction when an update changes nothing, to roll it back. */
class NothingChanged extends Error {
  constructor(readonly unchanged: number) {
    super('nothing changed');
  }
}

function insertSql(dialect: Dialect): string {
  const cols =
    '"id","projectId","externalId","features","text","imageRef","metadata","originalLabel","currentLabel","labelRevision","addedRevision","createdAt","updatedAt"';
  if (dialect === 'sqlite') {
    return `INSERT INTO "Sample" (${cols})
      SELECT value->>0, ?, value->>1, unhex(value->>2), value->>3, value->>4, value->>5, value->>6, value->>6, ?, ?, ?, ?
      FROM json_each(?)`;
  }
  return `INSERT INTO "Sample" (${cols})
    SELECT r->>0, $1, r->>1, decode(r->>2, 'base64'), r->>3, r->>4, r->>5, r->>6, r->>6, $2::int, $3::int, $4::timestamp(3), $5::timestamp(3)
    FROM jsonb_array_elements($6::jsonb) AS r`;
}

/** DateTime as the SQL layer stores it (Prisma's own text form on SQLite; UTC on PostgreSQL). */
function sqlTimestamp(dialect: Dialect, at: Date): string {
  const iso = at.toISOString();
  return dialect === 'sqlite' ? iso.replace('Z', '+00:00') : iso.replace('Z', '');
}

function sameBytes(a: Uint8Array, b: Uint8Array): boolean {
  if (a.byteLength !== b.byteLength) return false;
  for (let i = 0; i < a.byteLength; i++) if (a[i] !== b[i]) return false;
  return true;
}

/**
 * The rows of one INSERT as a JSON array of arrays [id, externalId, features, text, image,
 * metadata, label]; features hex-encoded for SQLite (unhex) and base64 for PostgreSQL (decode).
 */
function insertPayload(dialect: Dialect, rows: StagedRow[]): string {
  const encoding = dialect === 'sqlite' ? 'hex' : 'base64';
  return JSON.stringify(
    rows.map((r) => [
      newRowId(),
      r.id,
      Buffer.from(r.features.buffer, r.features.byteOffset, r.features.byteLength).toString(encoding),
      r.text,
      r.image,
      r.metadata,
      r.label,
    ]),
  );
}

/**
 * Inserts batches one statement at a time on the transaction's connection, preparing the next
 * batch's payload while the database works on the previous one.
 */
class RowInserter {
  private pending: Promise<unknown> | null = null;
  constructor(
    private readonly tx: DbTx,
    private readonly dialect: Dialect,
    private readonly projectId: string,
    private readonly revision: number,
    private readonly stamp: string,
  ) {}

  async add(rows: StagedRow[]): Promise<void> {
    const payload = insertPayload(this.dialect, rows);
    await this.flush();
    const p = this.tx.$executeRawUnsafe(insertSql(this.dialect), this.projectId, this.revision, this.revision, this.stamp, this.stamp, payload);
    // Keep a rejection from surfacing as unhandled before flush() awaits it.
    p.catch(() => undefined);
    this.pending = p;
  }

  async flush(): Promise<void> {
    const p = this.pending;
    this.pending = null;
    if (p !== null) await p;
  }
}

export async function applyImport(client: Db, scope: TeamScope, input: ApplyInput, options: ApplyOptions = {}): Promise<ApplyResult> {
  const dialect = await dialectOf(client);
  const batchSize = options.batchSize ?? 1000;
  const finish = options.finish ?? createHistoryRow;
  try {
    // SQLite has one writer: the import takes its turn with the process's other writes (serialWrite)
    // and takes the write lock with its first statement, so it waits for a background writer
    // instead of failing when it upgrades a read transaction to a write.
    return await serialWrite(client, () => client.$transaction(
      async (tx) => {
        if (dialect === 'sqlite') await tx.$executeRaw`UPDATE "Project" SET "currentRevision" = "currentRevision" WHERE "id" = ${input.projectId}`;
        const project = await tx.project.findFirst({
          where: { id: input.projectId, teamId: scope.teamId },
          select: { id: true, currentRevision: true, featureCount: true, maxClasses: true },
        });
        if (project === null) throw notFound();
        const countHolds = input.adoptFeatureCount
          ? project.featureCount === 0 || project.featureCount === input.featureCount
          : project.featureCount === input.featureCount;
        if (!countHolds) {
          throw conflict('The project’s feature count changed while the file was being read. Nothing was imported; try again.');
        }
        const last = await tx.revision.findFirst({
          where: { projectId: project.id },
          orderBy: { number: 'desc' },
          select: { number: true },
        });
        const revisionNumber = last === null ? project.currentRevision : Math.max(last.number, project.currentRevision) + 1;
        const now = new Date();
        const revision = await tx.revision.create({
          data: {
            projectId: project.id,
            number: revisionNumber,
            kind: 'import',
            note: `Import of ${input.fileName}`,
            createdById: input.userId,
          },
          select: { id: true },
        });

        // Classes first seen in this file, appended to the class list.
        const classes = await tx.projectClass.findMany({ where: { projectId: project.id }, select: { name: true } });
        const known = new Set(classes.map((c) => c.name));
        const toAdd = input.newClasses.filter((c) => !known.has(c));
        if (known.size + toAdd.length > project.maxClasses) {
          throw conflict(`This import would give the project ${known.size + toAdd.length} classes; it allows at most ${project.maxClasses}.`);
        }
        if (toAdd.length > 0) {
          await tx.projectClass.createMany({
            data: toAdd.map((name, i) => ({ projectId: project.id, name, position: known.size + i })),
          });
        }

        const stamp = sqlTimestamp(dialect, now);
        const inserter = new RowInserter(tx, dialect, project.id, revisionNumber, stamp);
        let added = 0;
        let relabelled = 0;
        let updated = 0;
        let unchanged = 0;
        let written = 0;
        for await (const batch of readSpool(input.spoolPath, batchSize)) {
          if (input.mode === 'insert') {
            await inserter.add(batch);
            added += batch.length;
          } else {
            const existing = [];
            for (let i = 0; i < batch.length; i += IN_LIST_LIMIT) {
              existing.push(
                ...(await tx.sample.findMany({
                  where: { projectId: project.id, externalId: { in: batch.slice(i, i + IN_LIST_LIMIT).map((r) => r.id) } },
                  select: { id: true, externalId: true, currentLabel: true, features: true, text: true, imageRef: true, metadata: true },
                })),
              );
            }
            const byId = new Map(existing.map((s) => [s.externalId, s]));
            const fresh = batch.filter((r) => !byId.has(r.id));
            if (fresh.length > 0) {
              await inserter.add(fresh);
              await inserter.flush();
              added += fresh.length;
            }
            const changes: { sampleId: string; fromLabel: string; toLabel: string }[] = [];
            for (const r of batch) {
              const s = byId.get(r.id);
              if (s === undefined) continue;
              const labelChanged = s.currentLabel !== r.label;
              const dataChanged =
                !sameBytes(s.features, r.features) || s.text !== r.text || s.imageRef !== r.image || s.metadata !== r.metadata;
              if (!labelChanged && !dataChanged) {
                unchanged++;
                continue;
              }
              await tx.sample.update({
                where: { id: s.id },
                data: {
                  features: r.features,
                  text: r.text,
                  imageRef: r.image,
                  metadata: r.metadata,
                  ...(labelChanged ? { currentLabel: r.label, labelRevision: revisionNumber } : {}),
                },
              });
              if (labelChanged) {
                relabelled++;
                changes.push({ sampleId: s.id, fromLabel: s.currentLabel, toLabel: r.label });
              } else {
                updated++;
              }
            }
            if (changes.length > 0) {
              await tx.labelChange.createMany({
                data: changes.map((c) => ({
                  projectId: project.id,
                  sampleId: c.sampleId,
                  revisionId: revision.id,
                  revisionNumber,
                  fromLabel: c.fromLabel,
                  toLabel: c.toLabel,
                  decidedById: input.userId,
                })),
              });
            }
          }
          written += batch.length;
          options.onWritten?.(written);
        }
        await inserter.flush();
        if (added + relabelled + updated === 0) throw new NothingChanged(unchanged);

        const parts = [`${added} added`];
        if (input.mode === 'update') parts.push(`${relabelled} relabelled`, `${updated} updated`);
        await tx.revision.update({
          where: { id: revision.id },
          // `update` when existing samples changed; a file that only adds samples is an `import`.
          data: {
            kind: relabelled + updated > 0 ? 'update' : 'import',
            changeCount: added + relabelled,
            note: `Import of ${input.fileName}: ${parts.join(', ')}`,
          },
        });
        const moved = await tx.project.updateMany({
          where: { id: project.id, currentRevision: project.currentRevision },
          data: { currentRevision: revisionNumber, ...(input.adoptFeatureCount ? { featureCount: input.featureCount } : {}) },
        });
        if (moved.count !== 1) throw conflict('Another change to this project was saved at the same time. Nothing was imported; try again.');
        const fit = await requestRefit(scope, project.id, revisionNumber, { tx });
        const result = { revisionNumber, fitId: fit.fitId, added, relabelled, updated, unchanged, classesAdded: toAdd.length };
        const batchId = await finish(tx, historyRow(input, revisionNumber), result);
        await recordAudit(tx, {
          action: 'import.applied',
          teamId: scope.teamId,
          userId: input.userId,
          targetType: 'project',
          targetId: project.id,
          detail: { batchId, revision: revisionNumber, rows: input.rowCount, added, relabelled, updated, mode: input.mode },
          address: input.address ?? null,
        });
        return { batchId, ...result };
      },
      { timeout: options.timeoutMs ?? 30 * 60_000, maxWait: 30_000 },
    ));
  } catch (error) {
    if (!(error instanceof NothingChanged)) throw error;
    const result = { revisionNumber: null, fitId: null, added: 0, relabelled: 0, updated: 0, unchanged: error.unchanged, classesAdded: 0 };
    const batchId = await finish(client, historyRow(input, null), result);
    return { batchId, ...result };
  }
}

function historyRow(input: ApplyInput, revisionNumber: number | null): HistoryRow {
  return {
    projectId: input.projectId,
    status: 'applied',
    fileName: input.fileName,
    format: input.format,
    mode: input.mode,
    rowCount: input.rowCount,
    revisionNumber,
    error: null,
    createdById: input.userId,
    finishedAt: new Date(),
  };
}
