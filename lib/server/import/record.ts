/**
 * How a finished import is written into the import history (ImportBatch).
 *
 * An import run in the request's process creates its history row when it finishes (applied, in
 * the same transaction as the samples; or failed). An import run by the job system already has a
 * row — the batch the request staged its upload into — so its recorder updates that row instead,
 * and only while this worker still holds the batch's lease (see job.ts). Either way the row and
 * the samples commit together or not at all.
 */
import type { ImportFormat, ImportMode } from '../../domain-data';
import type { DbTx } from '../db';
import type { ImportOutcome } from './index';

/** The history row of a finished import. */
export interface HistoryRow {
  projectId: string;
  status: 'applied' | 'failed';
  fileName: string;
  format: ImportFormat | 'unknown';
  mode: ImportMode;
  rowCount: number;
  revisionNumber: number | null;
  error: string | null;
  createdById: string | null;
  finishedAt: Date;
}

export interface ImportRecorder {
  /**
   * Writes the history row of a finished import and returns its batch id. For an applied import
   * it runs inside the apply transaction. `outcome` gives the import's outcome for that batch id
   * (what the request answers).
   */
  finish(client: DbTx, row: HistoryRow, outcome: (batchId: string) => ImportOutcome): Promise<string>;
}

/** A new history row; returns its batch id. */
export async function createHistoryRow(client: DbTx, row: HistoryRow): Promise<string> {
  const batch = await client.importBatch.create({ data: row, select: { id: true } });
  return batch.id;
}

/** In-process imports: a new history row per import. */
export const newBatchRecorder: ImportRecorder = { finish: (client, row) => createHistoryRow(client, row) };

/**
 * Thrown when a job-system import can no longer record its outcome: another worker took the batch
 * over (this worker's heartbeat went stale) or the batch is gone. The transaction rolls back; the
 * batch's current holder finishes it.
 */
export class ImportBatchLost extends Error {
  constructor(readonly batchId: string) {
    super(`import batch ${batchId} is no longer held by this worker`);
    this.name = 'ImportBatchLost';
  }
}
