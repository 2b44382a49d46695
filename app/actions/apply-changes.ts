'use server';

import { ApplyChangesInput } from '@/lib/domain-queue';
import { defineAction } from '@/lib/server/authz/define';
import { applyChanges as apply } from '@/lib/server/queue/apply';

const run = defineAction(
  { name: 'applyChanges', input: ApplyChangesInput, role: 'lead', resource: (i) => ({ projectId: i.projectId }) },
  async (input, caller) => {
    const r = await apply({ db: caller.db, clock: () => caller.now }, caller.scope, { userId: caller.user.id, role: caller.membership.role }, input.projectId);
    return r ? { revisionNumber: r.revisionNumber, changeCount: r.changeCount } : null;
  },
);

/** "Apply now": every agreed, pending relabel becomes one new revision, then a refit starts. */
export async function applyChanges(input: unknown) {
  return run(input);
}
