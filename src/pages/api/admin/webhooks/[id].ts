import type { APIRoute } from 'astro';
import { isUuid, json, problems } from '../../../../lib/server/http';
import { removeWebhookEndpoint } from '../../../../lib/server/webhooks';

/** Remove an endpoint: nothing more is sent to it (its log stays). */
export const DELETE: APIRoute = async ({ locals, params }) => {
  if (!isUuid(params.id)) return problems(404, 'No such webhook endpoint.');
  const ok = await removeWebhookEndpoint(params.id, locals.user!.id);
  if (!ok) return problems(404, 'No active webhook endpoint with this id.');
  return json({ removed: true });
};
