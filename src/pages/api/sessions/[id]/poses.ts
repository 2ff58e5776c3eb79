import type { APIRoute } from 'astro';
import { isUuid, json, problems, zodProblems } from '../../../../lib/server/http';
import { posePageSchema, sessionPoses } from '../../../../lib/server/sessions';

/** The parsed poses in file order, paginated: ?page=&pageSize= (at most 1000). */
export const GET: APIRoute = async ({ params, url }) => {
  if (!isUuid(params.id)) return problems(404, 'No such session.');
  const parsed = posePageSchema.safeParse(Object.fromEntries(url.searchParams));
  if (!parsed.success) return problems(400, 'Invalid page.', zodProblems(parsed.error));
  const page = await sessionPoses(params.id, parsed.data);
  if (!page) return problems(404, 'No such session.');
  return json(page);
};
