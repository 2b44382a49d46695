'use server';

import { SetupInput } from '@/lib/domain';
import { createFirstAccount } from '@/lib/server/auth/accounts';
import { definePublicAction } from '@/lib/server/authz/define';

const run = definePublicAction({ name: 'completeSetup', input: SetupInput }, async (input, caller) => {
  const { teamId } = await createFirstAccount(caller.db, input, { address: caller.address });
  return { email: input.email, teamId };
});

/** First run of a fresh install: the first account and its team. Refused afterwards (409). */
export async function completeSetup(input: unknown) {
  return run(input);
}
