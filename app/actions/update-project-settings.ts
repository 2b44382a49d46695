'use server';

import { UpdateProjectSettingsInput } from '@/lib/domain-queue';
import { defineAction } from '@/lib/server/authz/define';
import { updateProjectSettings as update } from '@/lib/server/queue/settings';

const run = defineAction(
  { name: 'updateProjectSettings', input: UpdateProjectSettingsInput, role: 'lead', resource: (i) => ({ projectId: i.projectId }) },
  async (input, caller) => {
    const r = await update({ db: caller.db, clock: () => caller.now }, caller.scope, { userId: caller.user.id, role: caller.membership.role }, input.projectId, input.settings);
    return { settings: r.settings, refitRevision: r.refit ? r.refit.revisionNumber : null };
  },
);

/** Fit and queue settings of a project (lead only); a change other than the apply rule queues a refit. */
export async function updateProjectSettings(input: unknown) {
  return run(input);
}
