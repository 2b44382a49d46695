'use server';

import { CreateInvitationInput } from '@/lib/domain';
import { defineAction } from '@/lib/server/authz/define';
import { createInvitation as create } from '@/lib/server/dal/invitations';

const run = defineAction(
  { name: 'createInvitation', input: CreateInvitationInput, role: 'lead', resource: (i) => ({ teamId: i.teamId }) },
  async (input, caller) => {
    const inv = await create(
      caller.scope,
      { role: input.role, expiresInHours: input.expiresInHours, label: input.label },
      { userId: caller.user.id, address: caller.address, now: caller.now },
    );
    // The secret leaves the server this once; only its hash is stored.
    return { id: inv.id, token: inv.token, role: inv.role, expiresAt: inv.expiresAt.toISOString() };
  },
);

/** A single-use, expiring invitation link for a role (lead only). */
export async function createInvitation(input: unknown) {
  return run(input);
}
