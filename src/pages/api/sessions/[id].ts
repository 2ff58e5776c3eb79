import type { APIRoute } from 'astro';
import { isUuid, json, problems } from '../../../lib/server/http';
import { getSession } from '../../../lib/server/sessions';

/** One session's metadata (the poses are paginated under /poses, the file under /file). */
export const GET: APIRoute = async ({ params }) => {
  if (!isUuid(params.id)) return problems(404, 'No such session.');
  const session = await getSession(params.id);
  if (!session) return problems(404, 'No such session.');
  return json({ session });
};
