import type { APIRoute } from 'astro';
import { z } from 'zod';
import { unitDrift } from '../../../../lib/server/drift';
import { json, problems, zodProblems } from '../../../../lib/server/http';

export const querySchema = z.strictObject({
  fits: z.enum(['true', 'false'], { error: 'fits must be true or false' }).optional(),
});

/** Each parameter's history over the unit's approved versions (`?fits=true` adds every fitted fit). */
export const GET: APIRoute = async ({ params, url }) => {
  const serial = params.serial ?? '';
  if (!/^[A-Za-z0-9][A-Za-z0-9._-]*$/.test(serial)) return problems(404, `No unit with serial number ${serial}.`);
  const q = querySchema.safeParse(Object.fromEntries(url.searchParams));
  if (!q.success) return problems(400, 'Invalid query.', zodProblems(q.error));
  const drift = await unitDrift(serial, { includeFits: q.data.fits === 'true' });
  if (!drift) return problems(404, `No unit with serial number ${serial}.`);
  return json(drift);
};
