import { DATA_LIMITS, ImageUploadQuery } from '@/lib/domain-data';
import { defineRoute } from '@/lib/server/authz/define';
import { requestBytes } from '@/lib/server/import/http';
import { saveUploadedImage } from '@/lib/server/import/uploads';

export const dynamic = 'force-dynamic';

/**
 * POST /api/projects/:projectId/imports/images?uploadBatch=…&name=<file name as in the data file>
 * Body: one image (PNG, JPEG, GIF or WebP, at most 10 MB). Send images before the data file and
 * pass the same uploadBatch to the import.
 */
export const POST = defineRoute(
  { name: 'uploadImportImage', input: ImageUploadQuery, role: 'lead', resource: (i) => ({ projectId: i.projectId }), body: 'stream' },
  async (input, _caller, req) => saveUploadedImage(input.projectId, input.uploadBatch, input.name, requestBytes(req, DATA_LIMITS.imageBytes)),
);
