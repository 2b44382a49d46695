'use server';

import { RevokeInvitationInput } from '@/lib/domain';
import { defineAction } from '@/lib/server/authz/define';
import { revokeInvitation as revoke } from '@/lib/server/dal/invitations';

const run = defineAction(
  { name: 'revokeInvitation', input: RevokeInvitationInput, role: 'lead', resource: (i) => ({ invitationId: i.invitationId }) },
  async (input, caller) =>
    revoke(caller.scope, input.invitationId, { userId: caller.user.id, address: caller.address, now: caller.now }),
);

/** Withdraws a pending invitation (lead only). */
export async function revokeInvitation(input: unknown) {
  return run(input);
}
