/**
 * "Next": hands a reviewer one queue item under a short lease.
 *
 * Lease rules (QUEUE_TIMING.leaseSeconds, 90 s):
 * - An item can be leased by one user at a time. A lease is free when it has no holder or its
 *   expiry has passed. Taking it is one conditional UPDATE (`WHERE id = … AND (no holder OR
 *   expired OR holder = me)`), so of two reviewers racing for the same item exactly one gets it,
 *   on SQLite and on PostgreSQL; the other moves on to the next candidate.
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
import { writeTx } from './tx';

export interface Claimed {
  readonly itemId: string;
  readonly leaseExpiresAt: Date;
}

const AWAITING = ['open', 'one-vote'];

export async function claimNext(
  deps: QueueDeps,
  scope: TeamScope,
  actor: Actor,
  input: { projectId: string; skipItemId?: string },
): Promise<Claimed | null> {
  if (!roleAtLeast(actor.role, 'reviewer')) throw forbidden(QUEUE_MESSAGES.observerVote);
  const { db } = deps;
  const project = await projectInScope(db, scope, input.projectId);
  const now = nowOf(deps);
  const until = new Date(now.getTime() + QUEUE_TIMING.leaseSeconds * 1000);
  const me = actor.userId;

  return writeTx(
    db,
    [],
    async (tx) => {
      if (input.skipItemId) {
        await tx.queueItem.updateMany({
          where: { id: input.skipItemId, projectId: project.id, leaseUserId: me },
          data: { leaseUserId: null, leaseExpiresAt: null },
        });
      }
      const releaseOthers = (keep: string) =>
        tx.queueItem.updateMany({
          where: { projectId: project.id, leaseUserId: me, id: { not: keep } },
          data: { leaseUserId: null, leaseExpiresAt: null },
        });

      // A live lease of mine: renew it and hand the same item back.
      const held = await tx.queueItem.findFirst({
        where: {
          projectId: project.id,
          leaseUserId: me,
          leaseExpiresAt: { gt: now },
          state: { in: AWAITING },
          votes: { none: { userId: me } },
          ...(input.skipItemId ? { id: { not: input.skipItemId } } : {}),
        },
        orderBy: { leaseExpiresAt: 'desc' },
        select: { id: true },
      });
      if (held) {
        const renewed = await tx.queueItem.updateMany({
          where: { id: held.id, leaseUserId: me, state: { in: AWAITING } },
          data: { leaseExpiresAt: until },
        });
        if (renewed.count === 1) {
          // One lease per reviewer: drop any other (stale) lease this user still holds here.
          await releaseOthers(held.id);
          return { itemId: held.id, leaseExpiresAt: until };
        }
      }

      const undoStart = new Date(now.getTime() - QUEUE_TIMING.undoSeconds * 1000);
      for (let round = 0; round < 4; round++) {
        const candidates = await tx.queueItem.findMany({
          where: {
            projectId: project.id,
            state: { in: AWAITING },
            ...(input.skipItemId ? { id: { not: input.skipItemId } } : {}),
            OR: [{ leaseUserId: null }, { leaseExpiresAt: { lte: now } }, { leaseUserId: me }],
            votes: { none: { userId: me } },
            NOT: { votes: { some: { createdAt: { gt: undoStart } } } },
          },
          // 'one-vote' sorts before 'open'.
          orderBy: [{ state: 'asc' }, { suspicion: 'desc' }, { id: 'asc' }],
          take: 6,
          select: { id: true },
        });
        if (candidates.length === 0) return null;
        for (const c of candidates) {
          // Conditional take: of two reviewers racing for this item exactly one matches.
          const taken = await tx.queueItem.updateMany({
            where: {
              id: c.id,
              state: { in: AWAITING },
              OR: [{ leaseUserId: null }, { leaseExpiresAt: { lte: now } }, { leaseUserId: me }],
            },
            data: { leaseUserId: me, leaseExpiresAt: until },
          });
          if (taken.count === 1) {
            await releaseOthers(c.id);
            return { itemId: c.id, leaseExpiresAt: until };
          }
        }
      }
      return null;
    },
    { sqliteLock: { table: 'Project', id: project.id } },
  );
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
