import type { APIRoute } from 'astro';
import { warmSessionDigest } from '../../../lib/server/session-checks';
import { json, problems, zodProblems } from '../../../lib/server/http';
import { createSession } from '../../../lib/server/session-intake';
import { listSessions, sessionListQuerySchema } from '../../../lib/server/sessions';

/** Sessions, newest measurement first; ?unit=SERIAL&page=&pageSize= */
export const GET: APIRoute = async ({ url }) => {
  const parsed = sessionListQuerySchema.safeParse(Object.fromEntries(url.searchParams));
  if (!parsed.success) return problems(400, 'Invalid session list query.', zodProblems(parsed.error));
  return json(await listSessions(parsed.data));
};

/**
 * Upload a session: multipart/form-data with `file` (the CSV) and the fields unit, measuredOn, technician,
 * instrument, instrumentUncertainty, ambientC, target, notes, allowOutsideLimits. Send `unit` before `file` so the CSV is checked
 * while it arrives.
 */
export const POST: APIRoute = async ({ locals, request }) => {
  const result = await createSession(request, { id: locals.user!.id, name: locals.user!.name });
  // The session page's checks are computed now, off the request, so its first view is quick.
  if (result.ok) warmSessionDigest(result.body.id);
  return json(result.body, result.status, result.ok ? { location: result.body.url } : {});
};
