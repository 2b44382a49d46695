'use server';

import { ClaimNextInput } from '@/lib/domain-queue';
import { defineAction } from '@/lib/server/authz/define';
import { claimNext } from '@/lib/server/queue/claim';
import { itemForReviewer, type ReviewItemView } from '@/lib/server/queue/view';

const run = defineAction(
  { name: 'claimNextItem', input: ClaimNextInput, role: 'reviewer', resource: (i) => ({ projectId: i.projectId }) },
  async (input, caller): Promise<{ item: ReviewItemView | null }> => {
    const deps = { db: caller.db, clock: () => caller.now };
    const actor = { userId: caller.user.id, role: caller.membership.role };
    const claimed = await claimNext(deps, caller.scope, actor, input);
    if (!claimed) return { item: null };
    return { item: await itemForReviewer(deps, caller.scope, actor, input.projectId, claimed.itemId) };
  },
);

/** "Next": leases the next queue item to the caller (or renews the one they hold) and returns it without votes. */
export async function claimNextItem(input: unknown) {
  return run(input);
}
