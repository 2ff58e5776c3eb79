import type { APIRoute } from 'astro';
import { z } from 'zod';
import { exportSingle } from '../../../../lib/server/exports';
import { EXPORT_FORMATS } from '../../../../lib/server/parameter-set-files';
import { isUuid, problems, zodProblems } from '../../../../lib/server/http';
import { URDF_ROOTS } from '../../../../lib/server/urdf';

export const querySchema = z.strictObject({
  format: z.enum(EXPORT_FORMATS, { error: `format must be one of ${EXPORT_FORMATS.join(', ')}` }),
  /** URDF only: where the tree starts — the robot base (default) or the tracker frame of the session. */
  frame: z.enum(URDF_ROOTS, { error: `frame must be one of ${URDF_ROOTS.join(', ')}` }).default('base'),
});

/** Download one file of an approved parameter set (`?format=json|csv|urdf[&frame=base|tracker]`), full precision; logged. */
export const GET: APIRoute = async ({ params, url, locals }) => {
  if (!isUuid(params.id)) return problems(404, 'No such parameter set.');
  const q = querySchema.safeParse(Object.fromEntries(url.searchParams));
  if (!q.success) return problems(400, 'Invalid query.', zodProblems(q.error));
  const file = await exportSingle(params.id, q.data.format, locals.user!, undefined, q.data.frame);
  if (!file) return problems(404, 'No such parameter set.');
  return new Response(file.bytes as Uint8Array<ArrayBuffer>, {
    status: 200,
    headers: {
      'content-type': `${file.mediaType}; charset=utf-8`,
      'content-disposition': `attachment; filename="${file.fileName}"`,
      'x-content-sha256': file.sha256,
      'cache-control': 'no-store',
    },
  });
};
