import type { APIRoute } from 'astro';
import { fitSettingsSchema } from '../../../../lib/server/fit-settings';
import { createFit, listFits } from '../../../../lib/server/fits';
import { isUuid, json, problems, readJson, zodProblems } from '../../../../lib/server/http';

/** The fits of one session, newest first. */
export const GET: APIRoute = async ({ params, url }) => {
  if (!isUuid(params.id)) return problems(404, 'No such session.');
  const page = Number(url.searchParams.get('page') ?? 1);
  // The upper bound keeps the OFFSET inside PostgreSQL's bigint (a 40-digit page would fail in the query).
  if (!Number.isInteger(page) || page < 1 || page > 100_000) return problems(400, 'Invalid query.', [{ field: 'page', message: 'page must be a whole number from 1 to 100000' }]);
  return json(await listFits({ session: params.id, page }));
};

/** Start a fit with settings; answers 202 with the fit's id at once (the job runs it). */
export const POST: APIRoute = async ({ params, request, locals }) => {
  if (!isUuid(params.id)) return problems(404, 'No such session.');
  const read = await readJson(request);
  if (!read.ok) return read.response;
  const parsed = fitSettingsSchema.safeParse(read.value);
  if (!parsed.success) return problems(400, 'Invalid fit settings.', zodProblems(parsed.error));
  const result = await createFit(params.id, parsed.data, locals.user!.id);
  if (!result.ok) return problems(result.status, result.error, result.errors);
  // An identical fit (same session and settings) still queued or running is returned instead of a new one.
  if (result.existing) return json({ id: result.id, existing: true, href: `/fits/${result.id}` }, 200, { location: `/api/fits/${result.id}` });
  return json({ id: result.id, state: 'queued', href: `/fits/${result.id}` }, 202, { location: `/api/fits/${result.id}` });
};
