'use server';

import { CreateTeamInput } from '@/lib/domain';
import { defineSignedInAction } from '@/lib/server/authz/define';
import { createTeamWithLead } from '@/lib/server/dal/teams';

const run = defineSignedInAction({ name: 'createTeam', input: CreateTeamInput }, async (input, caller) => {
  const { teamId } = await caller.db.$transaction((tx) =>
    createTeamWithLead(tx, { name: input.name, userId: caller.user.id, address: caller.address }),
  );
  return { teamId, name: input.name };
});

/** A new team with the caller as its lead; it becomes their current team. */
export async function createTeam(input: unknown) {
  return run(input);
}
