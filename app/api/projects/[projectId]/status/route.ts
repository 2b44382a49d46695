import { ProjectRefInput } from '@/lib/domain-queue';
import { defineRoute } from '@/lib/server/authz/define';
import { ensureFitWorker } from '@/lib/server/fits';
import { queueBoard } from '@/lib/server/queue/view';

export const dynamic = 'force-dynamic';

/**
 * What the queue screen polls: fit status, queue progress by state, who is reviewing now, recent
 * decisions with their newest standing, and — for leads — split items and pending changes.
 */
export const GET = defineRoute(
  { name: 'queueStatus', input: ProjectRefInput, role: 'member', resource: (i) => ({ projectId: i.projectId }) },
  async (input, caller) => {
    void ensureFitWorker().catch(() => undefined);
    return queueBoard(
      { db: caller.db, clock: () => caller.now },
      caller.scope,
      { userId: caller.user.id, role: caller.membership.role },
      input.projectId,
    );
  },
);
