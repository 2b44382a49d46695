import { Readable } from 'node:stream';
import { ImageFileQuery } from '@/lib/domain-data';
import { defineRoute } from '@/lib/server/authz/define';
import { notFound } from '@/lib/server/authz/errors';
import { openStoredImage } from '@/lib/server/import/uploads';

export const dynamic = 'force-dynamic';

/** GET /api/projects/:projectId/images/:batch/:file — an image uploaded with an import. */
export const GET = defineRoute(
  { name: 'projectImage', input: ImageFileQuery, role: 'member', resource: (i) => ({ projectId: i.projectId }) },
  async (input) => {
    const [batch, file] = input.path;
    const image = await openStoredImage(input.projectId, batch, file);
    if (image === null) throw notFound();
    return new Response(Readable.toWeb(image.stream) as ReadableStream<Uint8Array>, {
      headers: {
        'content-type': image.contentType,
        'content-length': String(image.size),
        'cache-control': 'private, max-age=3600',
        'x-content-type-options': 'nosniff',
        'content-security-policy': "default-src 'none'",
      },
    });
  },
);
