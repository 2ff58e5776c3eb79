import type { APIRoute } from 'astro';
import { z } from 'zod';
import { json, problems, readJson, zodProblems } from '../../../lib/server/http';
import { acceptInvitation, findInvitation } from '../../../lib/server/users';

/** Whether an invitation link is still usable (and for whom). */
export const GET: APIRoute = async ({ params }) => {
  const found = await findInvitation(params.token ?? '');
  if (!found) return problems(404, 'This link has been used or has expired.');
  return json({ email: found.user.email, name: found.user.name, expiresAt: found.inv.expiresAt });
};

export const body = z.object({ password: z.string() });

/** Set the password once; the link is spent. */
export const POST: APIRoute = async ({ params, request }) => {
  const read = await readJson(request);
  if (!read.ok) return read.response;
  const parsed = body.safeParse(read.value);
  if (!parsed.success) return problems(400, 'A password is required.', zodProblems(parsed.error));
  const result = await acceptInvitation(params.token ?? '', parsed.data.password);
  if (!result.ok) return problems(result.status, result.error, [{ field: 'password', message: result.error }]);
  return json({ email: result.email });
};
