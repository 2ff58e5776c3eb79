import type { APIRoute } from 'astro';
import { fleetPage, fleetQuerySchema } from '../../../../lib/server/fleet-snapshots';
import { isUuid, json, problems } from '../../../../lib/server/http';
import { queryProblems } from '../../../../lib/server/units';

/**
 * Fleet statistics of an arm model over its units' current approved sets, from the latest snapshot: the
 * summary and one page of units (`?page=&pageSize=`, flagged first). 202 while the first computation runs.
 */
export const GET: APIRoute = async ({ params, url }) => {
  if (!isUuid(params.id)) return problems(404, 'No such arm model.');
  const q = fleetQuerySchema.safeParse(Object.fromEntries(url.searchParams));
  if (!q.success) return problems(400, 'Invalid query.', queryProblems(q.error));
  const result = await fleetPage(params.id, q.data);
  if (result.state === 'missing') return problems(404, 'No such arm model.');
  if (result.state === 'computing') {
    return json({ model: result.model, computing: true, message: 'The fleet statistics of this model are being computed for the first time; ask again in a minute.' }, 202);
  }
  // The body is assembled from the snapshot's cached, serialised pieces (the same as JSON.stringify of the page).
  return new Response(result.json(), { status: 200, headers: { 'content-type': 'application/json; charset=utf-8', 'cache-control': 'no-store' } });
};
