'use server';

import { DecideSplitInput } from '@/lib/domain-queue';
import { defineAction } from '@/lib/server/authz/define';
import { decideSplit as decide } from '@/lib/server/queue/vote';

const run = defineAction(
  { name: 'decideSplit', input: DecideSplitInput, role: 'lead', resource: (i) => ({ projectId: i.projectId }) },
  async (input, caller) => {
    const r = await decide({ db: caller.db, clock: () => caller.now }, caller.scope, { userId: caller.user.id, role: caller.membership.role }, input);
    return { itemId: r.itemId, outcome: r.outcome, applied: r.applied ? { revisionNumber: r.applied.revisionNumber, changeCount: r.applied.changeCount } : null };
  },
);

/** A lead who cast neither vote decides a split item: keep, or relabel to a class. */
export async function decideSplit(input: unknown) {
  return run(input);
}
