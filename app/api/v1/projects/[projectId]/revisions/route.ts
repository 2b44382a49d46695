import { RevisionsQuery } from '@/lib/domain-data';
import { defineTokenRoute } from '@/lib/server/authz/token-route';
import { revisionsWithFits } from '@/lib/server/export/report';

export const dynamic = 'force-dynamic';

/** GET /api/v1/projects/:projectId/revisions — Authorization: Bearer <pipeline token>. */
export const GET = defineTokenRoute({ name: 'apiRevisions', input: RevisionsQuery }, async (input, caller) =>
  revisionsWithFits(caller.scope, input.projectId),
);
