import type { APIRoute } from 'astro';
import { exportableQuerySchema, exportableUnitsPage } from '../../../../lib/server/exports';
import { json, problems, zodProblems } from '../../../../lib/server/http';

/** Units with an approved (current) set, a page at a time by serial number (`?q=&page=&pageSize=`, at most 200). */
export const GET: APIRoute = async ({ url }) => {
  const q = exportableQuerySchema.safeParse(Object.fromEntries(url.searchParams));
  if (!q.success) return problems(400, 'Invalid query.', zodProblems(q.error));
  return json(await exportableUnitsPage(q.data));
};
