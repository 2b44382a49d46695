import { LabelsQuery } from '@/lib/domain-data';
import { defineTokenRoute } from '@/lib/server/authz/token-route';
import { labelsResponse } from '@/lib/server/export/http';

export const dynamic = 'force-dynamic';

/**
 * GET /api/v1/projects/:projectId/labels?format=jsonl|csv&since=N&features=1
 * Authorization: Bearer <pipeline token>. Current labels with provenance, streamed.
 */
export const GET = defineTokenRoute({ name: 'apiLabels', input: LabelsQuery }, async (input, caller) =>
  labelsResponse(caller.scope, input),
);
