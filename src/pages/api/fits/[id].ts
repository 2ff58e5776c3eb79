import type { APIRoute } from 'astro';
import { getFit } from '../../../lib/server/fits';
import { isUuid, json, problems } from '../../../lib/server/http';

/** A fit: state and progress while it runs, then the engine's full report and the review fields. */
export const GET: APIRoute = async ({ params }) => {
  if (!isUuid(params.id)) return problems(404, 'No such fit.');
  const fit = await getFit(params.id);
  if (!fit) return problems(404, 'No such fit.');
  return json({ fit });
};
