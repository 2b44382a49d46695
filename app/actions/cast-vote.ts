'use server';

import { CastVoteInput } from '@/lib/domain-queue';
import { defineAction } from '@/lib/server/authz/define';
import { castVote as cast } from '@/lib/server/queue/vote';

const run = defineAction(
  { name: 'castVote', input: CastVoteInput, role: 'reviewer', resource: (i) => ({ projectId: i.projectId }) },
  async (input, caller) => {
    const r = await cast({ db: caller.db, clock: () => caller.now }, caller.scope, { userId: caller.user.id, role: caller.membership.role }, input);
    return {
      voteId: r.voteId,
      itemId: r.itemId,
      result: r.result,
      undoUntil: r.undoUntil ? r.undoUntil.toISOString() : null,
      applied: r.applied ? { revisionNumber: r.applied.revisionNumber, changeCount: r.applied.changeCount } : null,
    };
  },
);

/** A reviewer's vote on a queue item: keep, or relabel to a class (optional note). */
export async function castVote(input: unknown) {
  return run(input);
}
