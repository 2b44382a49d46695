'use server';

import { SwitchTeamInput } from '@/lib/domain';
import { defineAction } from '@/lib/server/authz/define';
import { setCurrentTeam } from '@/lib/server/dal/teams';

const run = defineAction(
  { name: 'switchTeam', input: SwitchTeamInput, role: 'member', resource: (i) => ({ teamId: i.teamId }) },
  async (_input, caller) => {
    await setCurrentTeam(caller.scope, { userId: caller.user.id });
    return { teamId: caller.scope.teamId };
  },
);

/** Makes one of the caller's teams the current one. */
export async function switchTeam(input: unknown) {
  return run(input);
}
