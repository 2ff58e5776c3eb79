import type { APIRoute } from 'astro';
import { batchSchema, exportBatch, exportLogPage, logQuerySchema } from '../../../lib/server/exports';
import { json, problems, readJson, zodProblems } from '../../../lib/server/http';

/** The export log, newest first (`?page=&pageSize=`). */
export const GET: APIRoute = async ({ url }) => {
  const q = logQuerySchema.safeParse(Object.fromEntries(url.searchParams));
  if (!q.success) return problems(400, 'Invalid query.', zodProblems(q.error));
  return json(await exportLogPage(q.data.page, q.data.pageSize));
};

/** `{ serials: [...] }` (up to 10 000) → a zip of each unit's current set with manifests, streamed while it is written; logged. */
export const POST: APIRoute = async ({ request, locals }) => {
  const read = await readJson(request);
  if (!read.ok) return read.response;
  const parsed = batchSchema.safeParse(read.value);
  if (!parsed.success) return problems(400, 'Invalid export request.', zodProblems(parsed.error));
  const result = await exportBatch(parsed.data.serials, locals.user!, undefined, { certificates: parsed.data.certificates });
  if (!result.ok) {
    const index = (s: string) => parsed.data.serials.indexOf(s);
    return problems(400, 'Some units cannot be exported.', [
      ...result.unknown.map((s) => ({ field: `serials.${index(s)}`, message: `no unit with serial number ${s}` })),
      ...result.withoutSet.map((s) => ({ field: `serials.${index(s)}`, message: `unit ${s} has no approved parameter set` })),
    ]);
  }
  return new Response(result.stream, {
    status: 200,
    headers: {
      'content-type': 'application/zip',
      'content-disposition': `attachment; filename="${result.fileName}"`,
      'cache-control': 'no-store',
    },
  });
};
