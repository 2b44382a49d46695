/**
 * How a fit's standings are keyed and pruned, shared by the inline writer (standings-store.ts,
 * standings-writer.ts) and the writer thread (standings-worker.ts, which loads no ORM).
 *
 * Row i of fit F has the primary key `F:<i, 8 digits>`. Fit ids are cuids of one length, so the
 * keys of one fit form one contiguous range of the primary key and no other fit's key falls inside
 * it: a fit is pruned in short statements by key range alone. (With `"fitId" = ?` added, SQLite
 * chose the (fitId, suspicion) index and scanned every row of the fit for each 100-row batch —
 * 120–180 ms per statement on a 100k fit, each one holding the write lock that reviewers' votes
 * wait for; by key range it is 3 ms.)
 */
export function standingId(fitId: string, i: number): string {
  return `${fitId}:${i.toString().padStart(8, '0')}`;
}

/** Deletes the standings whose key is in [from, to): positional parameters per provider. */
export const PRUNE_RANGE_SQL = {
  sqlite: 'DELETE FROM "Standing" WHERE "id" >= ? AND "id" < ?',
  postgresql: 'DELETE FROM "Standing" WHERE "id" >= $1 AND "id" < $2',
} as const;
