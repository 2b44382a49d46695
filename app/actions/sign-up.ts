'use server';

import { SignUpInput } from '@/lib/domain';
import { createAccountFromInvitation } from '@/lib/server/auth/accounts';
import { definePublicAction } from '@/lib/server/authz/define';

const run = definePublicAction({ name: 'signUp', input: SignUpInput }, async (input, caller) => {
  const r = await createAccountFromInvitation(caller.db, input, { address: caller.address, now: caller.now });
  return { email: r.email, teamName: r.teamName, role: r.role };
});

/** New account from an invitation link; joins the inviting team. The client then signs in. */
export async function signUp(input: unknown) {
  return run(input);
}
