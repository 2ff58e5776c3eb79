import type { APIRoute } from 'astro';
import { fleetStatistics } from '../../../../lib/server/fleet';
import { isUuid, json, problems } from '../../../../lib/server/http';

/** Fleet statistics of an arm model over its units' current approved sets. */
export const GET: APIRoute = async ({ params }) => {
  if (!isUuid(params.id)) return problems(404, 'No such arm model.');
  const stats = await fleetStatistics(params.id);
  if (!stats) return problems(404, 'No such arm model.');
  return json(stats);
};
