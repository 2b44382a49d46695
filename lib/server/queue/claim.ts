/**
 * "Next": hands a reviewer one queue item under a short lease.
 *
 * Lease rules (QUEUE_TIMING.leaseSeconds, 90 s):
 * - An item can be leased by one user at a time. A lease is free when it has no holder or its
 *   expiry has passed. Choosing and taking it is one UPDATE whose subquery picks the item
 *   (`candidate`), so of two reviewers racing for the same item exactly one gets it, on SQLite and
 *   on PostgreSQL; the other gets the next candidate. A claim is two statements in one short
 *   transaction on SQLite, one statement on PostgreSQL (a second only when the first finds
 *   nothing, see `claimPostgres`): "next" is the hottest request of the queue.
 * - Claiming again while holding a live lease returns the same item and extends the lease (a
 *   reload, or the screen's periodic renewal, does not lose the item).
 * - Only items awaiting votes are handed out (open, one-vote), never one the caller has voted on,
 *   and never a one-vote item whose vote is still inside its undo window (its author may take it
 *   back; handing it out would let the second vote race the withdrawal).
 * - Order: one-vote items first (a second vote closes them), then by suspicion, highest first,
 *   ties by id. Voting releases the lease; "skip" releases it and asks for another item.
 */
import { QUEUE_TIMING } from '../../domain-queue';
import { roleAtLeast } from '../../domain';
import type { TeamScope } from '../authz/scope';
import { forbidden } from '../authz/errors';
import { nowOf, projectInScope, type Actor, type QueueDeps } from './context';
import { QUEUE_MESSAGES } from './messages';
import { Prisma, type Db } from '../db';
import { isTransient, providerOf, writeTx } from './tx';
import { reviewItemWithStandingSql, type ItemRowWithStanding } from './view';

export interface Claimed {
  readonly itemId: string;
  readonly leaseExpiresAt: Date;
  /**
   * The item as the reviewer screen reads it, with its standing, when the claim statement read it
   * (PostgreSQL, see claimPostgres); otherwise the caller reads it (view.ts `itemForReviewer`).
   */
  readonly view?: ItemRowWithStanding;
}

export async function claimNext(
  deps: QueueDeps,
  scope: TeamScope,
  actor: Actor,
  input: { projectId: string; skipItemId?: string },
): Promise<Claimed | null> {
  if (!roleAtLeast(actor.role, 'reviewer')) throw forbidden(QUEUE_MESSAGES.observerVote);
  const claimed = await claimInProject(deps, scope, input.projectId, actor.userId, input.skipItemId);
  // Nothing handed out: an empty queue, or a project outside the scope (then "not found").
  if (!claimed) await projectInScope(deps.db, scope, input.projectId);
  return claimed;
}

/**
 * The claim itself: the lease is taken (see `candidate`) and the caller's other leases in the
 * project are released. The scope is part of the claim statement: a project outside it has no
 * candidates, so the claim returns null for it (`claimNext` then tells "not found" from an empty
 * queue, off the hot path).
 * - SQLite: one transaction of two statements; the first is the claim UPDATE, a write, so the
 *   transaction takes the write lock at once (no separate lock statement, see tx.ts) and the choice
 *   and the take are atomic.
 * - PostgreSQL: one statement, no interactive transaction (whose BEGIN / COMMIT round trips held a
 *   pooled connection while reviewers queued): the candidate row is locked `FOR NO KEY UPDATE
 *   SKIP LOCKED` (the claim changes no key; see tx.ts on lock strengths), so reviewers racing for
 *   the head of the queue each lock a different row instead of waiting for one another; a row leased meanwhile by a committed claim is re-checked against the
 *   conditions under the lock (READ COMMITTED) and passed over. Of racing reviewers exactly one
 *   gets each item.
 */
async function claimInProject(deps: QueueDeps, scope: TeamScope, projectId: string, me: string, skipItemId?: string): Promise<Claimed | null> {
  const { db } = deps;
  const now = nowOf(deps);
  const until = new Date(now.getTime() + QUEUE_TIMING.leaseSeconds * 1000);
  const undoStart = new Date(now.getTime() - QUEUE_TIMING.undoSeconds * 1000);
  const args: TakeArgs = { projectId, teamId: scope.teamId, me, skip: skipItemId ?? '', now, until, undoStart };
  if (providerOf(db) === 'postgresql') {
    // Rows locked by someone else are passed over first; only if that leaves nothing does the claim
    // wait for them (see claimPostgres).
    const row = await claimPostgres(db, args, 'skip-locked');
    if (row) return { itemId: row.id, leaseExpiresAt: until, view: row };
    // The waiting claim's reads are as of its start, before the wait (a refit may have committed
    // new standings meanwhile): the caller reads the item afresh.
    const waited = await claimPostgres(db, args, 'wait');
    return waited === null ? null : { itemId: waited.id, leaseExpiresAt: until };
  }
  const id = await claimSqlite(db, args);
  return id === null ? null : { itemId: id, leaseExpiresAt: until };
}

interface TakeArgs {
  readonly projectId: string;
  /** the caller's team: the project must belong to it */
  readonly teamId: string;
  readonly me: string;
  /** item id not to hand out ('' for none) */
  readonly skip: string;
  readonly now: Date;
  readonly until: Date;
  readonly undoStart: Date;
}

/** Conditions every handed-out item meets: in the caller's project (of the caller's team), awaiting votes, not skipped, not voted on by the caller. */
function eligible(a: TakeArgs): Prisma.Sql {
  return Prisma.sql`q."projectId" = ${a.projectId}
      AND EXISTS (SELECT 1 FROM "Project" p WHERE p."id" = ${a.projectId} AND p."teamId" = ${a.teamId})
      AND q."id" <> ${a.skip}
      AND NOT EXISTS (SELECT 1 FROM "Vote" v WHERE v."queueItemId" = q."id" AND v."userId" = ${a.me})`;
}

/**
 * The item to hand out, as one expression: the caller's own live lease first (renewed by the
 * claim; kept even while another reviewer's vote on it is inside its undo window — the caller got
 * it back by an undo, or held it before that vote), else the first free one-vote item, else the
 * first free open item, each in suspicion order (highest first, ties by id). Free: no holder or an
 * expired lease, and no vote inside its undo window.
 *
 * Three sub-selects under COALESCE, each a short walk of an index with LIMIT 1 — (leaseUserId) for
 * the own lease, (projectId, state, suspicion) for the others — evaluated left to right only as
 * far as needed, on SQLite and PostgreSQL alike. (One ORDER BY over all of them, with the own
 * lease first, had to look at every item awaiting votes on every claim: 5 ms per claim on SQLite
 * and 10 ms on PostgreSQL with 2,000 items, measured.) `lock` is PostgreSQL's row lock, see
 * claimPostgres.
 */
function candidate(a: TakeArgs, lock: Prisma.Sql): Prisma.Sql {
  const firstFree = (state: 'one-vote' | 'open') => Prisma.sql`(SELECT q."id" FROM "QueueItem" q
      WHERE ${eligible(a)} AND q."state" = ${state}
        AND (q."leaseUserId" IS NULL OR q."leaseExpiresAt" <= ${a.now})
        AND NOT EXISTS (SELECT 1 FROM "Vote" v WHERE v."queueItemId" = q."id" AND v."createdAt" > ${a.undoStart})
      ORDER BY q."suspicion" DESC, q."id" ASC LIMIT 1 ${lock})`;
  return Prisma.sql`COALESCE(
    (SELECT q."id" FROM "QueueItem" q
      WHERE q."leaseUserId" = ${a.me} AND q."leaseExpiresAt" > ${a.now} AND q."state" IN ('open', 'one-vote') AND ${eligible(a)}
      ORDER BY q."leaseExpiresAt" DESC LIMIT 1 ${lock}),
    ${firstFree('one-vote')},
    ${firstFree('open')})`;
}

async function claimSqlite(db: Db, a: TakeArgs): Promise<string | null> {
  return writeTx(db, [], async (tx) => {
    const rows = await tx.$queryRaw<{ id: string }[]>`
      UPDATE "QueueItem" SET "leaseUserId" = ${a.me}, "leaseExpiresAt" = ${a.until}, "updatedAt" = ${new Date()}
      WHERE "id" = ${candidate(a, Prisma.empty)}
      RETURNING "id"`;
    const id = rows[0]?.id ?? null;
    // One lease per reviewer: the item skipped and any other (stale) lease of mine in the project go.
    if (id !== null || a.skip) {
      await tx.$executeRaw`UPDATE "QueueItem" SET "leaseUserId" = NULL, "leaseExpiresAt" = NULL, "updatedAt" = ${new Date()}
        WHERE "projectId" = ${a.projectId} AND "leaseUserId" = ${a.me} AND "id" <> ${id ?? ''}`;
    }
    return id;
  });
}

/**
 * PostgreSQL's claim, one statement that also reads the item for the reviewer screen with its
 * standing (view.ts `reviewItemWithStandingSql`): "next" is then two statements on PostgreSQL, the
 * authorization wrapper's and this one (plus the neighbours' labels), where it was five.
 *
 * `skip-locked`: a row locked by another transaction is passed over — the claims of reviewers
 * racing for the head of the queue each take a different row without waiting. But a refit's
 * completing transaction also holds rows: it rescores every item awaiting votes (build.ts) and
 * keeps them locked until it commits (up to a few hundred ms on a 100k project); passing over all
 * of them answered "nothing to review" while the queue was full. So when the skipping claim finds
 * nothing, `wait` runs the same statement waiting for the locks; once the holder commits, each row
 * is re-checked under the lock (READ COMMITTED) and one that no longer qualifies (taken, removed)
 * is passed over.
 *
 * The choice is a MATERIALIZED CTE: as a plain sub-select PostgreSQL inlined it and evaluated the
 * COALESCE twice, once for `IS NOT NULL` and once for the value — every sub-select, row lock and
 * anti-join probe done two times (1.8 → 1.05 ms per claim measured with psql on the bench's 100k
 * project).
 *
 * The item's own columns come from the UPDATE's RETURNING (the statement's other reads see the
 * snapshot from before the update, so reading QueueItem again would show the old lease); its sample
 * and standing are read on the statement's snapshot.
 */
async function claimPostgres(db: Db, a: TakeArgs, locked: 'skip-locked' | 'wait'): Promise<ItemRowWithStanding | null> {
  const updatedAt = new Date();
  const lock = locked === 'skip-locked' ? Prisma.sql`FOR NO KEY UPDATE SKIP LOCKED` : Prisma.sql`FOR NO KEY UPDATE`;
  for (let attempt = 0; ; attempt++) {
    try {
      // Data-modifying CTEs run once each, on one snapshot; `released` never touches the taken row.
      const rows = await db.$queryRaw<ItemRowWithStanding[]>`
        WITH chosen AS MATERIALIZED (SELECT ${candidate(a, lock)} AS "id"),
        picked AS (SELECT "id" FROM chosen WHERE "id" IS NOT NULL),
        taken AS (
          UPDATE "QueueItem" SET "leaseUserId" = ${a.me}, "leaseExpiresAt" = ${a.until}, "updatedAt" = ${updatedAt}
          WHERE "id" IN (SELECT "id" FROM picked)
          RETURNING "id", "projectId", "sampleId", "round", "reasons", "suspicion", "leaseUserId", "leaseExpiresAt"),
        released AS (
          UPDATE "QueueItem" SET "leaseUserId" = NULL, "leaseExpiresAt" = NULL, "updatedAt" = ${updatedAt}
          WHERE "projectId" = ${a.projectId} AND "leaseUserId" = ${a.me} AND "id" NOT IN (SELECT "id" FROM picked)
            AND (EXISTS (SELECT 1 FROM picked) OR "id" = ${a.skip})
          RETURNING "id")
        ${reviewItemWithStandingSql(Prisma.sql`taken`)}`;
      return rows[0] ?? null;
    } catch (e) {
      if (!isTransient(e) || attempt >= 7) throw e;
      await new Promise((r) => setTimeout(r, Math.min(400, 10 * 2 ** attempt) * (0.5 + Math.random())));
    }
  }
}

/** Gives up the caller's lease on an item (e.g. leaving the screen). */
export async function releaseLease(deps: QueueDeps, scope: TeamScope, actor: Actor, input: { projectId: string; itemId: string }): Promise<void> {
  const project = await projectInScope(deps.db, scope, input.projectId);
  await writeTx(
    deps.db,
    [],
    (tx) =>
      tx.queueItem.updateMany({
        where: { id: input.itemId, projectId: project.id, leaseUserId: actor.userId },
        data: { leaseUserId: null, leaseExpiresAt: null },
      }),
    { sqliteLock: { table: 'Project', id: project.id } },
  );
}
