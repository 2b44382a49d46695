/**
 * Storing a fit's standings: one Standing row per sample, written in batches of multi-row INSERTs
 * (an order of magnitude faster than the ORM's createMany for 100k rows, on both databases).
 *
 * Standing.detail layout (this module owns it): little-endian float32, two values per boundary in
 * the fit's boundary order — [decision f_k(x), out-of-fold decision f_k(x) (NaN when not computed)].
 * With the class list of the fit's metrics this gives every class's score, so the rival class and
 * the multi-class margin can be recomputed for display.
 *
 * Non-finite numbers cannot be stored in a SQLite REAL NOT NULL column (NaN becomes NULL), so
 * values are clamped: NaN → 0, ±∞ → ±1e30. Only degenerate fits (‖w‖ = 0) produce them.
 */
import type { Db, DbTx } from '../db';
import { serialWrite, type Provider } from '../queue/tx';
import { standingId } from './standings-keys';

export interface StandingRow {
  readonly sampleId: string;
  readonly margin: number;
  readonly distance: number;
  readonly slack: number;
  readonly alpha: number;
  readonly svKind: string;
  readonly oofMargin: number | null;
  readonly flags: string;
  readonly suspicion: number;
  readonly predicted: string;
  readonly detail: Uint8Array | null;
}

export function finite(v: number): number {
  if (Number.isNaN(v)) return 0;
  if (v === Infinity) return 1e30;
  if (v === -Infinity) return -1e30;
  return v;
}

/** Packs [decision_k, oofDecision_k] per boundary as float32. */
export function packDetail(decisions: readonly number[], oofDecisions: readonly number[] | null): Uint8Array<ArrayBuffer> {
  const out = new Float32Array(decisions.length * 2);
  for (let k = 0; k < decisions.length; k++) {
    out[2 * k] = decisions[k];
    out[2 * k + 1] = oofDecisions ? oofDecisions[k] : NaN;
  }
  return new Uint8Array(out.buffer);
}

export function unpackDetail(bytes: Uint8Array | null): { decision: number[]; oofDecision: (number | null)[] } | null {
  if (!bytes || bytes.byteLength % 8 !== 0) return null;
  const copy = bytes.slice();
  const f = new Float32Array(copy.buffer, 0, copy.byteLength / 4);
  const decision: number[] = [];
  const oofDecision: (number | null)[] = [];
  for (let k = 0; k < f.length / 2; k++) {
    decision.push(f[2 * k]);
    oofDecision.push(Number.isNaN(f[2 * k + 1]) ? null : f[2 * k + 1]);
  }
  return { decision, oofDecision };
}

const COLUMNS = ['id', 'fitId', 'sampleId', 'margin', 'distance', 'slack', 'alpha', 'svKind', 'oofMargin', 'flags', 'suspicion', 'predicted', 'detail'] as const;
/**
 * Rows per INSERT. Small enough that one statement (which better-sqlite3 runs synchronously on the
 * server's thread) stays in the tens of milliseconds, so requests interleave with a 100k-row write.
 */
const BATCH = 250;

/**
 * Inserts the standings of one fit: `count` rows, row i built by `rowAt(i)` when its batch is
 * written. Row ids are `<fitId>:<sequence>` (zero-padded), so a fit's rows are contiguous in the
 * primary key and new rows append instead of landing at random places (about 4× faster on a large
 * SQLite table); the fit's rows should come in sample-id order for the same reason (the feature
 * matrix, and so every fit, is in sample-id order). The event loop gets a turn between batches.
 */
export async function insertStandings(client: Db, provider: Provider, fitId: string, count: number, rowAt: (i: number) => StandingRow): Promise<number> {
  const head = `INSERT INTO "Standing" (${COLUMNS.map((c) => `"${c}"`).join(', ')}) VALUES `;
  let written = 0;
  for (let start = 0; start < count; start += BATCH) {
    const end = Math.min(count, start + BATCH);
    const values: unknown[] = [];
    const tuples: string[] = [];
    for (let i = start; i < end; i++) {
      const r = rowAt(i);
      const base = values.length;
      tuples.push(`(${COLUMNS.map((_, k) => (provider === 'postgresql' ? `$${base + k + 1}` : '?')).join(', ')})`);
      values.push(
        standingId(fitId, i),
        fitId,
        r.sampleId,
        finite(r.margin),
        finite(r.distance),
        finite(r.slack),
        finite(r.alpha),
        r.svKind,
        r.oofMargin === null ? null : finite(r.oofMargin),
        r.flags,
        finite(r.suspicion),
        r.predicted,
        r.detail,
      );
    }
    await serialWrite(client, () => client.$executeRawUnsafe(head + tuples.join(', '), ...values));
    written += end - start;
    await pause(provider);
  }
  return written;
}

/**
 * Between two batch statements: a turn of the event loop, and on SQLite also a few milliseconds with
 * the write lock free, so that writers in other processes (whose busy handler polls with sleeps)
 * are not starved by a long run of back-to-back batches.
 */
function pause(provider: Provider): Promise<void> {
  return new Promise<void>((resolve) => (provider === 'sqlite' ? setTimeout(resolve, 3) : setImmediate(resolve)));
}


/** Standings are kept for this many of a project's newest completed fits (plus its newest full pass). */
export const STANDINGS_RETENTION = 5;

/**
 * The fits of a project whose standings are no longer kept: all but the newest STANDINGS_RETENTION
 * done fits and the newest done full pass (their metrics and models stay), and every superseded,
 * failed or cancelled fit that has standings.
 */
export async function fitsToPrune(client: Db, projectId: string): Promise<string[]> {
  const done = await client.fit.findMany({
    where: { projectId, status: 'done' },
    orderBy: [{ revisionNumber: 'desc' }, { createdAt: 'desc' }],
    select: { id: true, metrics: true },
  });
  const keep = new Set(done.slice(0, STANDINGS_RETENTION).map((f) => f.id));
  const newestFull = done.find((f) => (f.metrics ?? '').includes('"pass":"full"'));
  if (newestFull) keep.add(newestFull.id);
  const candidates = await client.fit.findMany({ where: { projectId, id: { notIn: [...keep] }, standings: { some: {} } }, select: { id: true } });
  return candidates.map((c) => c.id);
}
