'use server';

import { RevokePipelineTokenInput } from '@/lib/domain-data';
import { defineAction } from '@/lib/server/authz/define';
import { revokePipelineToken as revoke } from '@/lib/server/tokens';

const run = defineAction(
  { name: 'revokePipelineToken', input: RevokePipelineTokenInput, role: 'lead', resource: (i) => ({ tokenId: i.tokenId }) },
  async (input, caller) => {
    const t = await revoke(caller.scope, input.tokenId, { userId: caller.user.id, address: caller.address, now: caller.now });
    return { id: t.id, revokedAt: t.revokedAt?.toISOString() ?? null };
  },
);

/** Revokes a pipeline token (lead only); calls with it are refused from then on. */
export async function revokePipelineToken(input: unknown) {
  return run(input);
}
