import type { APIRoute } from 'astro';
import { json, problems, readJson, zodProblems } from '../../../../lib/server/http';
import { createWebhookEndpoint, listWebhookEndpoints, webhookCreateSchema } from '../../../../lib/server/webhooks';

export const GET: APIRoute = async () => json({ endpoints: await listWebhookEndpoints() });

/** Register an endpoint `{ url, events, description? }`; the signing secret is in this response only. */
export const POST: APIRoute = async ({ locals, request }) => {
  const read = await readJson(request, 16 * 1024);
  if (!read.ok) return read.response;
  const parsed = webhookCreateSchema.safeParse(read.value);
  if (!parsed.success) return problems(400, 'The webhook endpoint has problems.', zodProblems(parsed.error));
  const created = await createWebhookEndpoint(parsed.data, locals.user!.id);
  return json(created, 201, { location: `/api/admin/webhooks/${created.endpoint.id}` });
};
