import type { APIRoute } from 'astro';
import { json, problems, readJson, zodProblems } from '../../../lib/server/http';
import { createApiToken, listApiTokens, tokenCreateSchema } from '../../../lib/server/users';

export const GET: APIRoute = async ({ locals }) => json({ tokens: await listApiTokens(locals.user!.id) });

/** Create a personal token; the secret is shown once in this response. */
export const POST: APIRoute = async ({ locals, request }) => {
  if (locals.user!.via === 'token') return problems(403, 'Tokens cannot create tokens; sign in to create one.');
  const read = await readJson(request);
  if (!read.ok) return read.response;
  const parsed = tokenCreateSchema.safeParse(read.value);
  if (!parsed.success) return problems(400, 'Invalid token request.', zodProblems(parsed.error));
  return json(await createApiToken(locals.user!.id, parsed.data.name), 201);
};
