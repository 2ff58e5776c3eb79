import type { APIRoute } from 'astro';
import { isUuid, json, problems } from '../../../../lib/server/http';
import { sessionCheck, sessionQuality } from '../../../../lib/server/session-checks';

/** The nominal model's error per pose and the pose-set quality of the measured configurations. */
export const GET: APIRoute = async ({ params }) => {
  if (!isUuid(params.id)) return problems(404, 'No such session.');
  const [check, quality] = await Promise.all([sessionCheck(params.id), sessionQuality(params.id)]);
  if (!check || !quality) return problems(404, 'No such session.');
  return json({ check, quality });
};
