import type { APIRoute } from 'astro';
import { isUuid, json, problems, readJson, zodProblems } from '../../../../lib/server/http';
import { rejectFit, rejectSchema } from '../../../../lib/server/reviews';

/** Return a fit awaiting review with the reason (comment required); the fit stays on record. */
export const POST: APIRoute = async ({ params, request, locals }) => {
  if (!isUuid(params.id)) return problems(404, 'No such fit.');
  const read = await readJson(request);
  if (!read.ok) return read.response;
  const parsed = rejectSchema.safeParse(read.value);
  if (!parsed.success) return problems(400, 'Invalid request.', zodProblems(parsed.error));
  const result = await rejectFit(params.id, locals.user!, parsed.data.comment);
  if (!result.ok) return problems(result.status, result.error);
  return json(result);
};
