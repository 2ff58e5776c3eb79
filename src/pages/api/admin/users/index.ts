import type { APIRoute } from 'astro';
import { json, problems, readJson, zodProblems } from '../../../../lib/server/http';
import { inviteSchema, inviteUser, listUsers } from '../../../../lib/server/users';

export const GET: APIRoute = async () => json({ users: await listUsers() });

/** Invite a person by e-mail: creates the account and sends a one-time set-password link. */
export const POST: APIRoute = async ({ locals, request }) => {
  const read = await readJson(request);
  if (!read.ok) return read.response;
  const parsed = inviteSchema.safeParse(read.value);
  if (!parsed.success) return problems(400, 'The invitation is incomplete.', zodProblems(parsed.error));
  const result = await inviteUser(parsed.data, locals.user!.id);
  if (!result.ok) return problems(409, result.error, [{ field: 'email', message: result.error }]);
  return json({ user: result.user }, 201);
};
