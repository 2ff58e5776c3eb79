import type { APIRoute } from 'astro';
import { modelTolerances, setModelTolerances, tolerancesSchema } from '../../../../lib/server/drift';
import { isUuid, json, problems, readJson, zodProblems } from '../../../../lib/server/http';

/** Drift tolerances per parameter group (defaults until set). */
export const GET: APIRoute = async ({ params }) => {
  if (!isUuid(params.id)) return problems(404, 'No such arm model.');
  const t = await modelTolerances(params.id);
  if (!t) return problems(404, 'No such arm model.');
  return json(t);
};

/** Replace the tolerances (all six groups; mm for lengths/base/tool, deg for angles). Engineers and admins. */
export const PUT: APIRoute = async ({ params, request, locals }) => {
  if (!isUuid(params.id)) return problems(404, 'No such arm model.');
  const read = await readJson(request);
  if (!read.ok) return read.response;
  const parsed = tolerancesSchema.safeParse(read.value);
  if (!parsed.success) return problems(400, 'Invalid tolerances.', zodProblems(parsed.error));
  const t = await setModelTolerances(params.id, parsed.data, locals.user!.id);
  if (!t) return problems(404, 'No such arm model.');
  return json(t);
};
