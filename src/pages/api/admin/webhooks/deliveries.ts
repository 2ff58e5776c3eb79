import type { APIRoute } from 'astro';
import { json, problems, zodProblems } from '../../../../lib/server/http';
import { listWebhookDeliveries, webhookDeliveryQuerySchema } from '../../../../lib/server/webhooks';

/** The delivery log, newest first (`?endpoint=<id>&page=&pageSize=`). */
export const GET: APIRoute = async ({ url }) => {
  const q = webhookDeliveryQuerySchema.safeParse(Object.fromEntries(url.searchParams));
  if (!q.success) return problems(400, 'Invalid query.', zodProblems(q.error));
  return json(await listWebhookDeliveries(q.data));
};
