import { ExportQuery } from '@/lib/domain-data';
import { defineRoute } from '@/lib/server/authz/define';
import { exportDownload } from '@/lib/server/export/http';

export const dynamic = 'force-dynamic';

/** GET /api/projects/:projectId/export?format=csv|jsonl|report&features=1&since=N — a download. */
export const GET = defineRoute(
  { name: 'exportData', input: ExportQuery, role: 'lead', resource: (i) => ({ projectId: i.projectId }) },
  async (input, caller) => exportDownload(caller.scope, input),
);
