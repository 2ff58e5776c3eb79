import type { APIRoute } from 'astro';
import { refit, refitSchema } from '../../../../lib/server/fits';
import { isUuid, json, problems, readJson, zodProblems } from '../../../../lib/server/http';

/**
 * Fit again: a new fit of the same session with the earlier fit's settings, these overrides, and its
 * exclusions plus `exclude`. The earlier fit is kept. Answers 202 with the new fit's id.
 */
export const POST: APIRoute = async ({ params, request, locals }) => {
  if (!isUuid(params.id)) return problems(404, 'No such fit.');
  const read = await readJson(request);
  if (!read.ok) return read.response;
  const parsed = refitSchema.safeParse(read.value);
  if (!parsed.success) return problems(400, 'Invalid fit settings.', zodProblems(parsed.error));
  const result = await refit(params.id, parsed.data, locals.user!.id);
  if (!result.ok) return problems(result.status, result.error, result.errors);
  // An identical fit (same session and settings) still queued or running is returned instead of a new one.
  if (result.existing) return json({ id: result.id, existing: true, href: `/fits/${result.id}` }, 200, { location: `/api/fits/${result.id}` });
  return json({ id: result.id, state: 'queued', parentFitId: params.id, href: `/fits/${result.id}` }, 202, { location: `/api/fits/${result.id}` });
};
