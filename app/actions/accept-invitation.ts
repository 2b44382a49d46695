'use server';

import { AcceptInvitationInput } from '@/lib/domain';
import { defineSignedInAction } from '@/lib/server/authz/define';
import { consumeInvitation } from '@/lib/server/dal/invitations';

const run = defineSignedInAction({ name: 'acceptInvitation', input: AcceptInvitationInput }, async (input, caller) => {
  const joined = await caller.db.$transaction((tx) =>
    consumeInvitation(tx, { token: input.token, userId: caller.user.id, address: caller.address, now: caller.now }),
  );
  return { teamId: joined.teamId, teamName: joined.teamName, role: joined.role };
});

/** The signed-in user joins the team of a valid invitation link. */
export async function acceptInvitation(input: unknown) {
  return run(input);
}
