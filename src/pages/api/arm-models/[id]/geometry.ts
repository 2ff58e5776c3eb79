import type { APIRoute } from 'astro';
import { z } from 'zod';
import { isUuid, problems } from '../../../../lib/server/http';
import { geometryFile } from '../../../../lib/server/arm-models';
import { queryProblems } from '../../../../lib/server/units';

export const querySchema = z.strictObject({
  revision: z.coerce.number({ error: 'revision must be a whole number (1, 2, …)' }).int('revision must be a whole number (1, 2, …)').min(1, 'revision starts at 1').optional(),
});

/** Download the arm geometry file of a revision (`?revision=N`, latest by default), full precision. */
export const GET: APIRoute = async ({ params, url }) => {
  if (!isUuid(params.id)) return problems(404, 'No such arm model.');
  const q = querySchema.safeParse(Object.fromEntries(url.searchParams));
  if (!q.success) {
    return problems(400, 'Invalid query.', queryProblems(q.error));
  }
  const file = await geometryFile(params.id, q.data.revision);
  if (!file) return problems(404, 'No such arm model.');
  if (!file.text) return problems(404, `Arm model ${file.model} has no revision r${file.missingRevision}.`, [{ field: 'revision', message: `no revision ${file.missingRevision}` }]);
  return new Response(file.text, {
    status: 200,
    headers: {
      'content-type': 'application/json; charset=utf-8',
      'content-disposition': `attachment; filename="${file.fileName}"`,
      'cache-control': 'no-store',
    },
  });
};
