'use server';

import { WithdrawVoteInput } from '@/lib/domain-queue';
import { defineAction } from '@/lib/server/authz/define';
import { withdrawVote as withdraw } from '@/lib/server/queue/vote';

const run = defineAction(
  { name: 'withdrawVote', input: WithdrawVoteInput, role: 'reviewer', resource: (i) => ({ projectId: i.projectId }) },
  async (input, caller) =>
    withdraw({ db: caller.db, clock: () => caller.now }, caller.scope, { userId: caller.user.id, role: caller.membership.role }, input),
);

/** Undo: withdraws the caller's own vote within its grace period (see lib/server/queue/vote.ts). */
export async function withdrawVote(input: unknown) {
  return run(input);
}
