'use server';

import { ChangeRoleInput } from '@/lib/domain';
import { defineAction } from '@/lib/server/authz/define';
import { changeMemberRole } from '@/lib/server/dal/members';

const run = defineAction(
  { name: 'changeRole', input: ChangeRoleInput, role: 'lead', resource: (i) => ({ membershipId: i.membershipId }) },
  async (input, caller) =>
    changeMemberRole(caller.scope, input, { userId: caller.user.id, address: caller.address, now: caller.now }),
);

/** Changes a member's role (lead only; a team keeps at least one lead). */
export async function changeRole(input: unknown) {
  return run(input);
}
