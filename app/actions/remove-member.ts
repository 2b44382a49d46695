'use server';

import { RemoveMemberInput } from '@/lib/domain';
import { defineAction } from '@/lib/server/authz/define';
import { removeMember as remove } from '@/lib/server/dal/members';

const run = defineAction(
  { name: 'removeMember', input: RemoveMemberInput, role: 'lead', resource: (i) => ({ membershipId: i.membershipId }) },
  async (input, caller) => remove(caller.scope, input, { userId: caller.user.id, address: caller.address, now: caller.now }),
);

/** Removes a member from the team (lead only; a team keeps at least one lead). */
export async function removeMember(input: unknown) {
  return run(input);
}
