import type { APIRoute } from 'astro';
import { json, problems } from '../../../../lib/server/http';
import { listParameterSets } from '../../../../lib/server/reviews';

/** A unit's parameter sets, newest first, each with state, approver, fit and the arm geometry file. */
export const GET: APIRoute = async ({ params }) => {
  const result = await listParameterSets(params.serial ?? '');
  if (!result) return problems(404, `No unit ${params.serial}.`);
  return json(result);
};
