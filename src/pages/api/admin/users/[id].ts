import type { APIRoute } from 'astro';
import { isUuid, json, problems, readJson, zodProblems } from '../../../../lib/server/http';
import { updateUser, userPatchSchema } from '../../../../lib/server/users';

/** Change a person's roles, name or active flag. */
export const PATCH: APIRoute = async ({ locals, params, request }) => {
  if (!isUuid(params.id)) return problems(404, 'No such user.');
  const read = await readJson(request);
  if (!read.ok) return read.response;
  const parsed = userPatchSchema.safeParse(read.value);
  if (!parsed.success) return problems(400, 'Invalid change.', zodProblems(parsed.error));
  const result = await updateUser(params.id, parsed.data, locals.user!.id);
  if (!result.ok) return problems(result.status, result.error);
  return json({ user: result.user });
};
