import type { APIRoute } from 'astro';
import { isUuid, json, problems } from '../../../../lib/server/http';
import { sessionCheck, sessionPageDigest } from '../../../../lib/server/session-checks';

/** The nominal model's error per pose and the pose-set quality of the measured configurations. */
export const GET: APIRoute = async ({ params }) => {
  if (!isUuid(params.id)) return problems(404, 'No such session.');
  // Every pose's error computed for this answer; the pose-set quality as kept with the session's digest.
  const [check, digest] = await Promise.all([sessionCheck(params.id), sessionPageDigest(params.id)]);
  if (!check || !digest) return problems(404, 'No such session.');
  return json({ check, quality: digest.quality });
};
