import type { APIRoute } from 'astro';
import { json, problems, readJson } from '../../../../lib/server/http';
import { getUnit, posePlan, queryProblems, posePlanSchema, SERIAL_PATTERN } from '../../../../lib/server/units';

/**
 * A pose plan for the unit's next session, made for its current geometry (the current parameter set, else the
 * nominal revision). GET `?count=60&seed=1&format=csv|json&index=O1`; POST the same fields as a JSON body.
 * CSV: a download (pose,q1..qn). JSON: the poses, the quality figures and the CSV text.
 */
async function answer(serial: string, raw: unknown) {
  if (!SERIAL_PATTERN.test(serial)) return problems(404, `No unit with serial number ${serial}.`);
  const opts = posePlanSchema.safeParse(raw);
  if (!opts.success) return problems(400, 'Invalid pose plan request.', queryProblems(opts.error));
  const unit = await getUnit(serial);
  if (!unit) return problems(404, `No unit with serial number ${serial}.`);
  const result = await posePlan(unit, opts.data);
  if (!result.ok) {
    return problems(422, 'No pose plan can be made for this geometry.', result.problems.map((p) => ({ field: p.column, line: p.line, message: p.message, expected: p.expected })));
  }
  const plan = result.plan;
  if (opts.data.format === 'csv') {
    return new Response(plan.csv, {
      status: 200,
      headers: {
        'content-type': 'text/csv; charset=utf-8',
        'content-disposition': `attachment; filename="${plan.fileName}"`,
        'cache-control': 'no-store',
      },
    });
  }
  return json(plan);
}

export const GET: APIRoute = async ({ params, url }) => answer(params.serial ?? '', Object.fromEntries(url.searchParams));

export const POST: APIRoute = async ({ params, request }) => {
  const read = await readJson(request, 16 * 1024);
  if (!read.ok) return read.response;
  return answer(params.serial ?? '', read.value);
};
