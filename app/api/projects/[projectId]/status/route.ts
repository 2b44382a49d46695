import { roleAtLeast } from '@/lib/domain';
import { ProjectRefInput } from '@/lib/domain-queue';
import { defineRoute } from '@/lib/server/authz/define';
import { ensureFitWorker } from '@/lib/server/fits';
import { pendingChanges } from '@/lib/server/queue/apply';
import { queueStatus, recentDecisions, splitItems } from '@/lib/server/queue/view';

export const dynamic = 'force-dynamic';

/**
 * What the queue screen polls: fit status, queue progress by state, who is reviewing now, recent
 * decisions with their newest standing, and — for leads — split items and pending changes.
 */
export const GET = defineRoute(
  { name: 'queueStatus', input: ProjectRefInput, role: 'member', resource: (i) => ({ projectId: i.projectId }) },
  async (input, caller) => {
    void ensureFitWorker(caller.db).catch(() => undefined);
    const deps = { db: caller.db, clock: () => caller.now };
    const actor = { userId: caller.user.id, role: caller.membership.role };
    const isLead = roleAtLeast(actor.role, 'lead');
    const [status, recent, splits, pending] = await Promise.all([
      queueStatus(deps, caller.scope, input.projectId),
      recentDecisions(deps, caller.scope, input.projectId),
      isLead ? splitItems(deps, caller.scope, actor, input.projectId) : Promise.resolve(null),
      isLead ? pendingChanges(deps, caller.scope, input.projectId) : Promise.resolve(null),
    ]);
    return {
      status,
      recent,
      lead: isLead && splits && pending ? { splits, pending: pending.map((p) => ({ ...p, closedAt: p.closedAt ? p.closedAt.toISOString() : null })) } : null,
    };
  },
);
