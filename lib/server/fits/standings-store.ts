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
import { randomUUID } from 'node:crypto';
import type { Db, DbTx } from '../db';
import type { Provider } from '../queue/tx';

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
const BATCH = 1000;

/** Inserts the standings of one fit (rows may be any order). Returns the number written. */
export async function insertStandings(
  client: Db | DbTx,
  provider: Provider,
  fitId: string,
  rows: readonly StandingRow[],
  onBatch?: (written: number) => Promise<void> | void,
): Promise<number> {
  const head = `INSERT INTO "Standing" (${COLUMNS.map((c) => `"${c}"`).join(', ')}) VALUES `;
  let written = 0;
  for (let start = 0; start < rows.length; start += BATCH) {
    const slice = rows.slice(start, start + BATCH);
    const values: unknown[] = [];
    const tuples: string[] = [];
    for (const r of slice) {
      const base = values.length;
      tuples.push(`(${COLUMNS.map((_, k) => (provider === 'postgresql' ? `$${base + k + 1}` : '?')).join(', ')})`);
      values.push(
        randomUUID(),
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
    await client.$executeRawUnsafe(head + tuples.join(', '), ...values);
    written += slice.length;
    if (onBatch) await onBatch(written);
  }
  return written;
}
