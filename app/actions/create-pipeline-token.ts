'use server';

import { CreatePipelineTokenInput } from '@/lib/domain-data';
import { defineAction } from '@/lib/server/authz/define';
import { createPipelineToken as create } from '@/lib/server/tokens';

const run = defineAction(
  { name: 'createPipelineToken', input: CreatePipelineTokenInput, role: 'lead', resource: (i) => ({ projectId: i.projectId }) },
  async (input, caller) => {
    const t = await create(caller.scope, input.projectId, input.name, { userId: caller.user.id, address: caller.address, now: caller.now });
    return {
      id: t.id,
      name: t.name,
      prefix: t.prefix,
      createdAt: t.createdAt.toISOString(),
      createdBy: t.createdBy,
      /** Shown once in the browser; only its hash is stored. */
      secret: t.secret,
    };
  },
);

/** Creates a pipeline token for a project (lead only); the answer carries the secret, once. */
export async function createPipelineToken(input: unknown) {
  return run(input);
}
