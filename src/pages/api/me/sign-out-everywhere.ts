import type { APIRoute } from 'astro';
import { z } from 'zod';
import { json, problems, readJson, zodProblems } from '../../../lib/server/http';
import { endAllSessions } from '../../../lib/server/users';

export const confirmSchema = z.strictObject({
  confirm: z.literal(true, { error: 'send { "confirm": true } to end every browser session of yours' }),
});

/**
 * End every browser session of the caller, on every device (API tokens stay; revoke them under /account).
 * It signs the caller out too, so it needs an explicit { "confirm": true }.
 */
export const POST: APIRoute = async ({ locals, request }) => {
  const read = await readJson(request, 1024);
  if (!read.ok) return read.response;
  const parsed = confirmSchema.safeParse(read.value);
  if (!parsed.success) return problems(400, 'Confirm ending every session.', zodProblems(parsed.error));
  const ended = await endAllSessions(locals.user!.id, 'everywhere');
  return json({ ended });
};
