import type { APIRoute } from 'astro';
import { json, problems, readJson } from '../../../lib/server/http';
import { listUnits, queryProblems, registerUnit, unitListQuerySchema, unitRegisterSchema } from '../../../lib/server/units';

/** `?page=1&pageSize=25&sort=serial&dir=asc&q=…&site=…&model=<id>` → `{ items, total, page, pageSize }`. */
export const GET: APIRoute = async ({ url }) => {
  const q = unitListQuerySchema.safeParse(Object.fromEntries(url.searchParams));
  if (!q.success) return problems(400, 'Invalid query.', queryProblems(q.error));
  return json(await listUnits(q.data));
};

/** Register a unit: `{ serial, modelId, revision?, site?, cell?, commissionedOn?, notes? }`; 409 for a known serial. */
export const POST: APIRoute = async ({ locals, request }) => {
  const read = await readJson(request);
  if (!read.ok) return read.response;
  const parsed = unitRegisterSchema.safeParse(read.value);
  if (!parsed.success) return problems(400, 'The unit has problems.', queryProblems(parsed.error));
  const result = await registerUnit(parsed.data, locals.user!.id);
  if (!result.ok) return problems(result.status, result.error, result.issues);
  return json(result.unit, 201, { location: `/api/units/${encodeURIComponent(result.unit.serial)}` });
};

