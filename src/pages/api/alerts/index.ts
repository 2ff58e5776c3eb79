import type { APIRoute } from 'astro';
import { z } from 'zod';
import { openAlerts } from '../../../lib/server/drift';
import { json, problems, zodProblems } from '../../../lib/server/http';

export const querySchema = z.strictObject({ model: z.uuid({ error: 'model must be an arm model id' }).optional() });

/** Open (unacknowledged) drift alerts, newest first (`?model=` for one arm model). */
export const GET: APIRoute = async ({ url }) => {
  const q = querySchema.safeParse(Object.fromEntries(url.searchParams));
  if (!q.success) return problems(400, 'Invalid query.', zodProblems(q.error));
  return json({ alerts: await openAlerts({ modelId: q.data.model }) });
};
