import type { APIRoute } from 'astro';
import { isUuid, json, problems, readJson, zodProblems } from '../../../../lib/server/http';
import { submitFit, submitSchema } from '../../../../lib/server/reviews';

/** Submit a fitted fit for review (optional comment; an implausible fit needs an engineer's `override`); mails the reviewers. */
export const POST: APIRoute = async ({ params, request, locals }) => {
  if (!isUuid(params.id)) return problems(404, 'No such fit.');
  const read = await readJson(request);
  if (!read.ok) return read.response;
  const parsed = submitSchema.safeParse(read.value);
  if (!parsed.success) return problems(400, 'Invalid request.', zodProblems(parsed.error));
  const result = await submitFit(params.id, locals.user!, parsed.data.comment, undefined, { override: parsed.data.override });
  if (!result.ok) return problems(result.status, result.error);
  return json(result);
};
