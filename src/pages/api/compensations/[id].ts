import type { APIRoute } from 'astro';
import { getCompensation } from '../../../lib/server/compensations';
import { isUuid, json, problems } from '../../../lib/server/http';

/** One compensation: state, progress, checksums and (when done) the summary of statuses and corrections. */
export const GET: APIRoute = async ({ params }) => {
  if (!isUuid(params.id)) return problems(404, 'No such compensation.');
  const c = await getCompensation(params.id);
  return c ? json(c) : problems(404, 'No such compensation.');
};
