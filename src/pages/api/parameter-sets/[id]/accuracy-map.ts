import type { APIRoute } from 'astro';
import { accuracyMapOf } from '../../../../lib/server/certificate';
import { isUuid, json, problems } from '../../../../lib/server/http';

/**
 * The before/after accuracy map of an approved set as numbers (the figures behind the coloured map on the
 * certificate and the unit page): predicted |calibrated − nominal| in mm on three planes. Computed off the
 * request thread.
 */
export const GET: APIRoute = async ({ params }) => {
  if (!isUuid(params.id)) return problems(404, 'No such parameter set.');
  const map = await accuracyMapOf(params.id);
  if (!map) return problems(404, 'No such parameter set.');
  return json(map, 200, { 'cache-control': 'private, max-age=300' });
};
