import { SamplesQuery } from '@/lib/domain-data';
import { defineTokenRoute } from '@/lib/server/authz/token-route';
import { importJsonResponse } from '@/lib/server/import/http';

export const dynamic = 'force-dynamic';

/**
 * POST /api/v1/projects/:projectId/samples?mode=update|insert&fileName=…&featurePrefix=…
 * Authorization: Bearer <pipeline token>. Body: CSV or JSON Lines, streamed. All or nothing:
 * 200 with counts and the new revision, 400 with the problems (row and column), 409 when a
 * concurrent change intervened.
 */
export const POST = defineTokenRoute({ name: 'apiSamples', input: SamplesQuery }, async (input, caller, req) =>
  importJsonResponse(
    caller.scope,
    input.projectId,
    { fileName: input.fileName, mode: input.mode, featurePrefix: input.featurePrefix, userId: caller.userId, address: caller.address },
    req,
  ),
);
