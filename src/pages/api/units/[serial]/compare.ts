import type { APIRoute } from 'astro';
import { z } from 'zod';
import { compareForUnit } from '../../../../lib/server/compare';
import { json, problems } from '../../../../lib/server/http';
import { queryProblems } from '../../../../lib/server/units';

const ref = z.string({ error: 'required: nominal, a parameter set id, or fit:<id>' }).trim().min(1).max(80);
export const querySchema = z.strictObject({
  a: ref,
  b: ref,
  samples: z.coerce.number({ error: 'samples must be a whole number from 100 to 20000' }).int().min(100).max(20_000).default(2000),
  includeBase: z.enum(['true', 'false'], { error: 'includeBase must be true or false' }).default('false'),
});

/** Two geometries of a unit side by side: ?a=…&b=… (nominal, a parameter set id, or fit:<id>). */
export const GET: APIRoute = async ({ params, url }) => {
  const parsed = querySchema.safeParse(Object.fromEntries(url.searchParams));
  if (!parsed.success) return problems(400, 'Invalid query.', queryProblems(parsed.error));
  const q = parsed.data;
  const result = await compareForUnit(params.serial ?? '', q.a, q.b, { samples: q.samples, includeBase: q.includeBase === 'true' });
  if (!result.ok) return problems(result.status, result.error, result.errors);
  return json(result);
};
