import type { APIRoute } from 'astro';
import { createCompensation, listCompensations } from '../../../../lib/server/compensations';
import { json } from '../../../../lib/server/http';

/** The unit's compensated programs, newest first. */
export const GET: APIRoute = async ({ params }) => json({ compensations: await listCompensations(params.serial!) });

/**
 * Compensate a program for the unit's current parameter set: multipart/form-data with `file` (the
 * program CSV), optional `frame` (base | measurement) and `tool` (x,y,z[,rx,ry,rz]). 202 `{ id, url }`;
 * the job's state is at GET /api/compensations/{id}.
 */
export const POST: APIRoute = async ({ params, request, locals }) => {
  const result = await createCompensation(request, params.serial!, locals.user!.id);
  return json(result.body, result.status, result.ok ? { location: `/api/compensations/${result.body.id}` } : {});
};
