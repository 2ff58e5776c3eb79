import type { APIRoute } from 'astro';
import { json } from '../../../lib/server/http';
import { endAllSessions } from '../../../lib/server/users';

/** End every browser session of the caller, on every device (API tokens stay; revoke them under /account). */
export const POST: APIRoute = async ({ locals }) => {
  const ended = await endAllSessions(locals.user!.id, 'everywhere');
  return json({ ended });
};
