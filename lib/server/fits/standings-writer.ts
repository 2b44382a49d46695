/**
 * Where a finished fit's standings go. Two implementations with one interface:
 * - `inlineStandingsWriter(db)`: batched INSERTs through the server's own Prisma client (tests,
 *   scripts);
 * - `workerStandingsWriter(config)`: a worker thread with its own connection
 *   (standings-worker.ts), used by the app's fit worker so that a 100k-row write does not occupy the
 *   thread that answers reviewers.
 * Both take the standings as columns (typed arrays), write rows with ids `<fitId>:<sequence>` in
 * sample order, prune whole fits by those id ranges, and store a fit's serialised model.
 */
import { join } from 'node:path';
import type { Worker } from 'node:worker_threads';
import { flagNames, supportKindName } from '../../margin/standings';
import type { Db } from '../db';
import type { DatabaseConfig } from '../env';
import { providerOf, serialWrite, writerGate } from '../queue/tx';
import { startTsWorker } from '../../margin/worker-client';
import type { StandingColumns } from './standings-worker';
import { insertStandings, type StandingRow } from './standings-store';
import { standingId } from './standings-keys';

export type { StandingColumns } from './standings-worker';

export interface StandingsWriter {
  write(fitId: string, columns: StandingColumns): Promise<number>;
  /** Stores the fit's serialised model (`Fit.model`); the worker writer takes over the buffer. Resolves with the rows changed (0 when the fit is gone). */
  model(fitId: string, model: Uint8Array<ArrayBuffer>): Promise<number>;
  /** Deletes every standing of these fits. */
  prune(fitIds: readonly string[]): Promise<number>;
}

/** Row i of the columns, as the inline writer stores it. */
export function rowFromColumns(c: StandingColumns, i: number): StandingRow {
  const w = c.detailWidth;
  const detail = new Uint8Array(w * 4);
  new Float32Array(detail.buffer).set(c.detail.subarray(i * w, (i + 1) * w));
  return {
    sampleId: c.sampleIds[i],
    margin: c.margin[i],
    distance: c.distance[i],
    slack: c.slack[i],
    alpha: c.alpha[i],
    svKind: supportKindName(c.support[i]),
    oofMargin: Number.isNaN(c.oofMargin[i]) ? null : c.oofMargin[i],
    flags: flagNames(c.flags[i]).join(','),
    suspicion: c.suspicion[i],
    predicted: c.classes[c.predicted[i]] ?? '',
    detail,
  };
}

export function inlineStandingsWriter(db: Db): StandingsWriter {
  return {
    write: (fitId, c) => insertStandings(db, providerOf(db), fitId, c.sampleIds.length, (i) => rowFromColumns(c, i)),
    model: async (fitId, model) => (await serialWrite(db, () => db.fit.updateMany({ where: { id: fitId }, data: { model } }))).count,
    async prune(fitIds) {
      let removed = 0;
      for (const fitId of fitIds) {
        for (let lo = 0; ; lo += 500) {
          // By key range alone (standings-keys.ts): the range holds this fit's rows only.
          const r = await serialWrite(db, () => db.standing.deleteMany({ where: { id: { gte: standingId(fitId, lo), lt: standingId(fitId, lo + 500) } } }));
          removed += r.count;
          await new Promise<void>((resolve) => setTimeout(resolve, 2));
          if (r.count === 0) break;
        }
        removed += (await serialWrite(db, () => db.standing.deleteMany({ where: { fitId } }))).count;
      }
      return removed;
    },
  };
}

/** A writer thread for one database (SQLite file or PostgreSQL URL). */
export function workerStandingsWriter(config: DatabaseConfig): StandingsWriter {
  let worker: Worker | null = null;
  let nextId = 1;
  const pending = new Map<number, { resolve: (n: number) => void; reject: (e: Error) => void }>();
  const ensure = (): Worker => {
    if (worker) return worker;
    const data = config.provider === 'sqlite' ? { provider: 'sqlite', file: config.file, gate: writerGate() } : { provider: 'postgresql', url: config.url };
    const w = startTsWorker(join(process.cwd(), 'lib', 'server', 'fits', 'standings-worker.ts'), data);
    w.unref();
    w.on('message', (m: { type: 'done'; id: number; count: number } | { type: 'error'; id: number; message: string }) => {
      const p = pending.get(m.id);
      if (!p) return;
      pending.delete(m.id);
      if (m.type === 'done') p.resolve(m.count);
      else p.reject(new Error(m.message));
    });
    const fail = (e: Error) => {
      if (worker === w) worker = null;
      for (const p of pending.values()) p.reject(e);
      pending.clear();
    };
    w.on('error', fail);
    w.on('exit', (code) => fail(new Error(`standings writer exited (${code})`)));
    worker = w;
    return w;
  };
  const send = (message: Record<string, unknown>, transfer: ArrayBuffer[] = []) =>
    new Promise<number>((resolve, reject) => {
      const id = nextId++;
      pending.set(id, { resolve, reject });
      ensure().postMessage({ ...message, id }, transfer);
    });
  return {
    write: (fitId, columns) => send({ type: 'write', fitId, rows: columns }),
    // The blob (megabytes for 100k samples) is moved to the thread, and written there.
    model: (fitId, model) => send({ type: 'model', fitId, bytes: model }, [model.buffer]),
    prune: (fitIds) => (fitIds.length === 0 ? Promise.resolve(0) : send({ type: 'prune', fitIds: [...fitIds] })),
  };
}
