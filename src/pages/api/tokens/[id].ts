import type { APIRoute } from 'astro';
import { json, problems } from '../../../lib/server/http';
import { revokeApiToken } from '../../../lib/server/users';

export const DELETE: APIRoute = async ({ locals, params }) => {
  const ok = await revokeApiToken(locals.user!.id, params.id ?? '');
  if (!ok) return problems(404, 'No active token with this id among yours.');
  return json({ revoked: true });
};
