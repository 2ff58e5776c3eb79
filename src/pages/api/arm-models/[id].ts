import type { APIRoute } from 'astro';
import { isUuid, json, problems } from '../../../lib/server/http';
import { getArmModel, parseUpdateBody, readBodyText, updateArmModel } from '../../../lib/server/arm-models';

/** The model with every revision (geometry, note, when) and the latest one. */
export const GET: APIRoute = async ({ params }) => {
  if (!isUuid(params.id)) return problems(404, 'No such arm model.');
  const model = await getArmModel(params.id);
  if (!model) return problems(404, 'No such arm model.');
  return json(model);
};

/**
 * Change metadata and/or geometry. A geometry change on a revision that units or sessions use becomes the next
 * revision (response `newRevision: true`); otherwise the latest revision is updated in place.
 */
export const PUT: APIRoute = async ({ locals, params, request }) => {
  if (!isUuid(params.id)) return problems(404, 'No such arm model.');
  const body = await readBodyText(request);
  if (!body.ok) return problems(body.status, body.error);
  const parsed = parseUpdateBody(body.text);
  if (!parsed.ok) return problems(400, parsed.error, parsed.issues);
  const result = await updateArmModel(params.id, parsed.value, locals.user!.id);
  if (!result.ok) return problems(result.status, result.error, result.issues);
  return json({ ...result.model, revision: result.revision, newRevision: result.newRevision });
};
