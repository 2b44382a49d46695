import { ImportQuery } from '@/lib/domain-data';
import { defineRoute } from '@/lib/server/authz/define';
import { importProgressResponse } from '@/lib/server/import/http';

export const dynamic = 'force-dynamic';

/**
 * POST /api/projects/:projectId/imports?mode=insert|update&fileName=…&featurePrefix=…&uploadBatch=…
 * Body: the CSV or JSON Lines file, streamed (no size limit of server actions). Answers with
 * JSON lines: progress while reading and writing, then the outcome.
 */
export const POST = defineRoute(
  { name: 'importData', input: ImportQuery, role: 'lead', resource: (i) => ({ projectId: i.projectId }), body: 'stream' },
  async (input, caller, req) =>
    importProgressResponse(
      caller.scope,
      input.projectId,
      {
        fileName: input.fileName,
        mode: input.mode,
        featurePrefix: input.featurePrefix,
        uploadBatch: input.uploadBatch,
        userId: caller.user.id,
        address: caller.address,
      },
      req,
    ),
);
