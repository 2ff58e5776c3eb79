import type { APIRoute } from 'astro';
import { acknowledgeAlert, acknowledgeSchema } from '../../../../lib/server/drift';
import { isUuid, json, problems, readJson, zodProblems } from '../../../../lib/server/http';

/** Acknowledge a drift alert with a comment; clears the unit's attention mark when no open alert remains. */
export const POST: APIRoute = async ({ params, request, locals }) => {
  if (!isUuid(params.id)) return problems(404, 'No such alert.');
  const read = await readJson(request);
  if (!read.ok) return read.response;
  const parsed = acknowledgeSchema.safeParse(read.value);
  if (!parsed.success) return problems(400, 'A comment is required.', zodProblems(parsed.error));
  const result = await acknowledgeAlert(params.id, parsed.data.comment, locals.user!.id);
  if (!result.ok) return problems(result.status, result.error);
  return json(result);
};
