import type { APIRoute } from 'astro';
import { json, problems } from '../../../lib/server/http';
import { createArmModel, listArmModels, parseCreateBody, readBodyText } from '../../../lib/server/arm-models';

export const GET: APIRoute = async () => json({ items: await listArmModels() });

/** Create an arm model (revision r1): `{ name, manufacturer?, description?, geometry }` or the raw arm geometry file. */
export const POST: APIRoute = async ({ locals, request }) => {
  const body = await readBodyText(request);
  if (!body.ok) return problems(body.status, body.error);
  const parsed = parseCreateBody(body.text);
  if (!parsed.ok) return problems(400, parsed.error, parsed.issues);
  const result = await createArmModel(parsed.value, locals.user!.id);
  if (!result.ok) return problems(result.status, result.error, result.issues);
  return json(result.model, 201, { location: `/api/arm-models/${result.model.id}` });
};
