import type { APIRoute } from 'astro';
import { exportableSerials, exportableSerialsQuerySchema } from '../../../../lib/server/exports';
import { json, problems, zodProblems } from '../../../../lib/server/http';

/** The serial numbers of every exportable unit a search matches (`?q=`), up to the batch limit of 10 000. */
export const GET: APIRoute = async ({ url }) => {
  const q = exportableSerialsQuerySchema.safeParse(Object.fromEntries(url.searchParams));
  if (!q.success) return problems(400, 'Invalid query.', zodProblems(q.error));
  return json(await exportableSerials(q.data.q));
};
