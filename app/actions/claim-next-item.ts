'use server';

import { ClaimNextInput } from '@/lib/domain-queue';
import { defineAction } from '@/lib/server/authz/define';
import { nextForReviewer, SCREEN_NEIGHBOUR_WAIT_MS } from '@/lib/server/queue/next';
import type { ReviewItemView } from '@/lib/server/queue/view';

const run = defineAction(
  { name: 'claimNextItem', input: ClaimNextInput, role: 'reviewer', resource: (i) => ({ projectId: i.projectId }) },
  async (input, caller): Promise<{ item: ReviewItemView | null }> => {
    const deps = { db: caller.db, clock: () => caller.now, neighbourWaitMs: SCREEN_NEIGHBOUR_WAIT_MS };
    const actor = { userId: caller.user.id, role: caller.membership.role };
    return { item: await nextForReviewer(deps, caller.scope, actor, input) };
  },
);

/** "Next": leases the next queue item to the caller (or renews the one they hold) and returns it without votes. */
export async function claimNextItem(input: unknown) {
  return run(input);
}
