import type { APIRoute } from 'astro';
import { fitListQuerySchema, listFits } from '../../../lib/server/fits';
import { json, problems } from '../../../lib/server/http';
import { queryProblems } from '../../../lib/server/units';

/** Fits newest first: ?unit=<serial>&state=<fit state>&review=<review state|none>&page=&pageSize= */
export const GET: APIRoute = async ({ url }) => {
  const parsed = fitListQuerySchema.safeParse(Object.fromEntries(url.searchParams));
  if (!parsed.success) return problems(400, 'Invalid query.', queryProblems(parsed.error));
  return json(await listFits(parsed.data));
};
