import type { APIRoute } from 'astro';
import { isUuid, json, problems, zodProblems } from '../../../../lib/server/http';
import { sessionCheck, sessionPageDigest } from '../../../../lib/server/session-checks';
import { sessionCheckQuerySchema } from '../../../../lib/server/sessions';

/**
 * The nominal model's error over the session's poses (statistics and verdicts over all of them, the poses a
 * page at a time: `?page=&pageSize=` up to 1000, `order=file|error`) and the pose-set quality.
 */
export const GET: APIRoute = async ({ params, url }) => {
  if (!isUuid(params.id)) return problems(404, 'No such session.');
  const query = sessionCheckQuerySchema.safeParse(Object.fromEntries(url.searchParams));
  if (!query.success) return problems(400, 'Invalid query.', zodProblems(query.error));
  // Every pose's error computed for this answer (on an engine thread); the pose-set quality as kept with the session's digest.
  const [check, digest] = await Promise.all([sessionCheck(params.id, query.data), sessionPageDigest(params.id)]);
  if (!check || !digest) return problems(404, 'No such session.');
  return json({ check, quality: digest.quality });
};
