/**
 * Votes, consensus, undo and split decisions.
 *
 * Consensus: an item takes two votes from two different people. The first makes it `one-vote`;
 * the second either agrees (same decision and, for a relabel, the same class) and closes it —
 * outcome `kept` or `relabelled`, `finalLabel` set — or disagrees and makes it `split`. A lead who
 * cast neither vote decides a split item, which closes it. Nobody votes twice on an item (also
 * enforced by the unique (queueItemId, userId) constraint), so the same person can never be both
 * votes; and a lead who cast one of the two votes cannot break the tie either.
 *
 * Blindness: nothing here returns another person's vote; the reviewer's own vote is returned so
 * the screen can offer undo.
 *
 * Undo (QUEUE_TIMING.undoSeconds, 10 s): the author may withdraw a vote until the earliest of
 *   (a) 10 s after it was cast (server clock),
 *   (b) the item advancing past it: a later vote on the item, or a lead's decision,
 *   (c) for the vote that closed an item as relabelled: the relabel being applied to a revision.
 * Withdrawing the only vote returns the item to `open`; withdrawing the second (closing or
 * splitting) vote returns it to `one-vote`. Either way the author gets the item's lease back when
 * nobody else holds it, so they can vote again at once. While a one-vote item's vote is inside its
 * window, "next" does not hand the item to anyone else (claim.ts).
 *
 * Every transition runs in writeTx with the item's row locked first (tx.ts), so concurrent votes on
 * one item are applied one after the other on both databases: no lost or duplicated votes.
 */
import { roleAtLeast } from '../../domain';
import { QUEUE_TIMING, type VoteChoice } from '../../domain-queue';
import type { TeamScope } from '../authz/scope';
import { ActionError, badRequest, conflict, forbidden } from '../authz/errors';
import { isUniqueViolation, type Db, type DbTx } from '../db';
import { nowOf, projectInScope, type Actor, type QueueDeps } from './context';
import { QUEUE_MESSAGES } from './messages';
import { writeTx } from './tx';
import { maybeAutoApplyInProject, type AppliedBatch } from './apply';
import { traced } from '../trace';

export interface VoteOutcome {
  readonly voteId: string;
  readonly itemId: string;
  /** The item's state after this vote, as far as the voter may know it. */
  readonly result: 'recorded' | 'closed' | 'split';
  /** When the undo window of this vote ends (null when already past, e.g. applied at once). */
  readonly undoUntil: Date | null;
  /** A revision made by the apply rule right after this vote, if any. */
  readonly applied: AppliedBatch | null;
}

function itemGone(): ActionError {
  return new ActionError(404, QUEUE_MESSAGES.itemGone);
}

async function checkChoice(tx: DbTx, projectId: string, currentLabel: string, choice: VoteChoice): Promise<void> {
  if (choice.decision !== 'relabel') return;
  const cls = await tx.projectClass.findFirst({ where: { projectId, name: choice.label }, select: { id: true } });
  if (!cls) throw badRequest(QUEUE_MESSAGES.unknownClass(choice.label), { label: QUEUE_MESSAGES.unknownClass(choice.label) });
  if (choice.label === currentLabel) throw badRequest(QUEUE_MESSAGES.sameLabel, { label: QUEUE_MESSAGES.sameLabel });
}

async function classExists(db: Db, projectId: string, name: string): Promise<boolean> {
  const rows = await db.$queryRaw<{ id: string }[]>`SELECT "id" FROM "ProjectClass" WHERE "projectId" = ${projectId} AND "name" = ${name} LIMIT 1`;
  return rows.length > 0;
}

/** The refusals of `checkChoice`, with the class lookup done beforehand. */
function judgeChoice(knownClass: boolean, currentLabel: string, choice: VoteChoice): void {
  if (choice.decision !== 'relabel') return;
  if (!knownClass) throw badRequest(QUEUE_MESSAGES.unknownClass(choice.label), { label: QUEUE_MESSAGES.unknownClass(choice.label) });
  if (choice.label === currentLabel) throw badRequest(QUEUE_MESSAGES.sameLabel, { label: QUEUE_MESSAGES.sameLabel });
}

interface ItemForVote {
  readonly id: string;
  readonly state: string;
  readonly leaseUserId: string | null;
  readonly leaseExpiresAt: Date | null;
  readonly currentLabel: string;
  readonly votes: { id: string; userId: string; decision: string; label: string | null }[];
}

type ItemVoteRow = {
  id: string;
  state: string;
  leaseUserId: string | null;
  leaseExpiresAt: Date | string | null;
  currentLabel: string;
  voteId: string | null;
  voteUserId: string | null;
  decision: string | null;
  label: string | null;
};

/** The item, its sample's current label and its votes, in one statement (one row per vote). */
async function itemWithVotes(tx: DbTx, projectId: string, itemId: string): Promise<ItemForVote | null> {
  const rows = await tx.$queryRaw<ItemVoteRow[]>`
    SELECT q."id", q."state", q."leaseUserId", q."leaseExpiresAt", s."currentLabel",
      v."id" AS "voteId", v."userId" AS "voteUserId", v."decision", v."label"
    FROM "QueueItem" q
    JOIN "Sample" s ON s."id" = q."sampleId"
    LEFT JOIN "Vote" v ON v."queueItemId" = q."id"
    WHERE q."id" = ${itemId} AND q."projectId" = ${projectId}
    ORDER BY v."createdAt" ASC, v."id" ASC`;
  const head = rows[0];
  if (!head) return null;
  return {
    id: head.id,
    state: head.state,
    leaseUserId: head.leaseUserId,
    leaseExpiresAt: head.leaseExpiresAt === null ? null : new Date(head.leaseExpiresAt),
    currentLabel: head.currentLabel,
    votes: rows.flatMap((r) => (r.voteId !== null && r.voteUserId !== null && r.decision !== null ? [{ id: r.voteId, userId: r.voteUserId, decision: r.decision, label: r.label }] : [])),
  };
}

/** A vote's effect on its item: the new state (with the outcome when it closes); the lease is released. */
async function setItemState(tx: DbTx, itemId: string, to: { state: 'one-vote' | 'split' } | { state: 'closed'; outcome: string; finalLabel: string | null; closedAt: Date }): Promise<void> {
  if (to.state === 'closed') {
    await tx.$executeRaw`UPDATE "QueueItem" SET "state" = 'closed', "outcome" = ${to.outcome}, "finalLabel" = ${to.finalLabel}, "closedAt" = ${to.closedAt},
        "leaseUserId" = NULL, "leaseExpiresAt" = NULL, "updatedAt" = ${new Date()}
      WHERE "id" = ${itemId}`;
  } else {
    await tx.$executeRaw`UPDATE "QueueItem" SET "state" = ${to.state}, "leaseUserId" = NULL, "leaseExpiresAt" = NULL, "updatedAt" = ${new Date()}
      WHERE "id" = ${itemId}`;
  }
}

function agrees(a: { decision: string; label: string | null }, b: { decision: string; label: string | null }): boolean {
  return a.decision === b.decision && (a.decision === 'keep' || a.label === b.label);
}

export async function castVote(
  deps: QueueDeps,
  scope: TeamScope,
  actor: Actor,
  input: { projectId: string; itemId: string } & VoteChoice,
): Promise<VoteOutcome> {
  if (!roleAtLeast(actor.role, 'reviewer')) throw forbidden(QUEUE_MESSAGES.observerVote);
  const { db } = deps;
  const me = actor.userId;
  // The class is looked up beside the project read (its answer is used only once the project is
  // known to be in scope) and before the transaction (classes are only ever added); it is judged
  // inside the transaction in the usual order of refusals: the less the transaction does, the
  // shorter SQLite's write lock is held.
  const [project, knownClass] = await Promise.all([
    projectInScope(db, scope, input.projectId),
    input.decision === 'relabel' ? classExists(db, input.projectId, input.label) : true,
  ]);
  const recorded = await traced('vote.tx', () => writeTx(db, [{ table: 'QueueItem', id: input.itemId }], async (tx) => {
    const now = nowOf(deps);
    const item = await itemWithVotes(tx, project.id, input.itemId);
    if (!item) throw itemGone();
    if (item.state === 'closed') throw conflict(QUEUE_MESSAGES.closed);
    if (item.state === 'split') throw conflict(QUEUE_MESSAGES.split);
    if (item.votes.some((v) => v.userId === me)) throw conflict(QUEUE_MESSAGES.votedTwice);
    if (item.leaseUserId && item.leaseUserId !== me && item.leaseExpiresAt && item.leaseExpiresAt > now) {
      throw conflict(QUEUE_MESSAGES.leaseTaken);
    }
    judgeChoice(knownClass, item.currentLabel, input);
    const label = input.decision === 'relabel' ? input.label : null;
    let vote;
    try {
      vote = await tx.vote.create({
        data: { queueItemId: item.id, userId: me, decision: input.decision, label, note: input.note || null, createdAt: now },
        select: { id: true },
      });
    } catch (e) {
      if (isUniqueViolation(e)) throw conflict(QUEUE_MESSAGES.votedTwice);
      throw e;
    }
    const others = item.votes;
    if (others.length === 0) {
      await setItemState(tx, item.id, { state: 'one-vote' });
      return { voteId: vote.id, result: 'recorded' as const, now };
    }
    const first = others[0];
    if (agrees(first, { decision: input.decision, label })) {
      await setItemState(tx, item.id, {
        state: 'closed',
        outcome: input.decision === 'keep' ? 'kept' : 'relabelled',
        finalLabel: input.decision === 'keep' ? item.currentLabel : label,
        closedAt: now,
      });
      return { voteId: vote.id, result: 'closed' as const, now, relabel: input.decision === 'relabel' };
    }
    await setItemState(tx, item.id, { state: 'split' });
    return { voteId: vote.id, result: 'split' as const, now };
  }));

  let applied: AppliedBatch | null = null;
  if (recorded.result === 'closed' && 'relabel' in recorded && recorded.relabel) {
    applied = await traced('vote.apply', () => maybeAutoApplyInProject(deps, project, me));
  }
  const undoEnd = new Date(recorded.now.getTime() + QUEUE_TIMING.undoSeconds * 1000);
  const appliedThis = applied !== null && applied.itemIds.includes(input.itemId);
  return { voteId: recorded.voteId, itemId: input.itemId, result: recorded.result, undoUntil: appliedThis ? null : undoEnd, applied };
}

export interface Withdrawn {
  readonly itemId: string;
  /** The item's state after the withdrawal. */
  readonly state: 'open' | 'one-vote';
  /** True when the item's lease went back to the author. */
  readonly leased: boolean;
}

export async function withdrawVote(deps: QueueDeps, scope: TeamScope, actor: Actor, input: { projectId: string; voteId: string }): Promise<Withdrawn> {
  const { db } = deps;
  const project = await projectInScope(db, scope, input.projectId);
  const located = await db.vote.findFirst({
    where: { id: input.voteId, queueItem: { projectId: project.id } },
    select: { queueItemId: true },
  });
  if (!located) throw itemGone();
  return writeTx(db, [{ table: 'QueueItem', id: located.queueItemId }], async (tx) => {
    const now = nowOf(deps);
    const item = await tx.queueItem.findFirst({
      where: { id: located.queueItemId, projectId: project.id },
      select: {
        id: true,
        state: true,
        tiebreakById: true,
        appliedRevision: true,
        leaseUserId: true,
        leaseExpiresAt: true,
        votes: { select: { id: true, userId: true, createdAt: true }, orderBy: [{ createdAt: 'asc' }, { id: 'asc' }] },
      },
    });
    if (!item) throw itemGone();
    const mine = item.votes.find((v) => v.id === input.voteId);
    if (!mine) throw itemGone();
    if (mine.userId !== actor.userId) throw forbidden(QUEUE_MESSAGES.notYourVote);
    if (now.getTime() - mine.createdAt.getTime() > QUEUE_TIMING.undoSeconds * 1000) throw conflict(QUEUE_MESSAGES.undoExpired);
    if (item.appliedRevision !== null) throw conflict(QUEUE_MESSAGES.undoApplied);
    const last = item.votes[item.votes.length - 1];
    if (item.tiebreakById !== null || last.id !== mine.id) throw conflict(QUEUE_MESSAGES.undoAdvanced);
    await tx.vote.delete({ where: { id: mine.id } });
    const state = item.votes.length === 1 ? ('open' as const) : ('one-vote' as const);
    const leaseFree = !item.leaseUserId || item.leaseUserId === actor.userId || !item.leaseExpiresAt || item.leaseExpiresAt <= now;
    await tx.queueItem.update({
      where: { id: item.id },
      data: {
        state,
        outcome: null,
        finalLabel: null,
        closedAt: null,
        ...(leaseFree ? { leaseUserId: actor.userId, leaseExpiresAt: new Date(now.getTime() + QUEUE_TIMING.leaseSeconds * 1000) } : {}),
      },
    });
    if (leaseFree) {
      await tx.queueItem.updateMany({
        where: { projectId: project.id, leaseUserId: actor.userId, id: { not: item.id } },
        data: { leaseUserId: null, leaseExpiresAt: null },
      });
    }
    return { itemId: item.id, state, leased: leaseFree };
  });
}

export interface Decided {
  readonly itemId: string;
  readonly outcome: 'kept' | 'relabelled';
  readonly applied: AppliedBatch | null;
}

/** A lead decides a split item (closes it). The lead must not have cast either vote. */
export async function decideSplit(
  deps: QueueDeps,
  scope: TeamScope,
  actor: Actor,
  input: { projectId: string; itemId: string } & VoteChoice,
): Promise<Decided> {
  if (!roleAtLeast(actor.role, 'lead')) throw forbidden(QUEUE_MESSAGES.leadOnlyDecide);
  const { db } = deps;
  const project = await projectInScope(db, scope, input.projectId);
  const outcome = await writeTx(db, [{ table: 'QueueItem', id: input.itemId }], async (tx) => {
    const now = nowOf(deps);
    const item = await tx.queueItem.findFirst({
      where: { id: input.itemId, projectId: project.id },
      select: { id: true, state: true, sample: { select: { currentLabel: true } }, votes: { select: { userId: true } } },
    });
    if (!item) throw itemGone();
    if (item.state === 'closed') throw conflict(QUEUE_MESSAGES.closed);
    if (item.state !== 'split') throw conflict(QUEUE_MESSAGES.notSplit);
    if (item.votes.some((v) => v.userId === actor.userId)) throw conflict(QUEUE_MESSAGES.bothVotes);
    await checkChoice(tx, project.id, item.sample.currentLabel, input);
    const relabel = input.decision === 'relabel';
    await tx.queueItem.update({
      where: { id: item.id },
      data: {
        state: 'closed',
        outcome: relabel ? 'relabelled' : 'kept',
        finalLabel: relabel ? input.label : item.sample.currentLabel,
        tiebreakById: actor.userId,
        tiebreakNote: input.note || null,
        closedAt: now,
        leaseUserId: null,
        leaseExpiresAt: null,
      },
    });
    return relabel ? ('relabelled' as const) : ('kept' as const);
  });
  const applied = outcome === 'relabelled' ? await maybeAutoApplyInProject(deps, project, actor.userId) : null;
  return { itemId: input.itemId, outcome, applied };
}
