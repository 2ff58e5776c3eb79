import type { APIRoute } from 'astro';
import { fleetInputsChangedByFit } from '../../../../lib/server/fleet-snapshots';
import { isUuid, json, problems, readJson, zodProblems } from '../../../../lib/server/http';
import { approveFit, decisionSchema } from '../../../../lib/server/reviews';

/** Approve a fit awaiting review: the unit's next parameter set version (four-eyes rule applies). */
export const POST: APIRoute = async ({ params, request, locals }) => {
  if (!isUuid(params.id)) return problems(404, 'No such fit.');
  const read = await readJson(request);
  if (!read.ok) return read.response;
  const parsed = decisionSchema.safeParse(read.value);
  if (!parsed.success) return problems(400, 'Invalid request.', zodProblems(parsed.error));
  const result = await approveFit(params.id, locals.user!, parsed.data.comment, undefined, { confirmOlderSession: parsed.data.confirmOlderSession });
  if (!result.ok) return problems(result.status, result.error);
  // The unit's model's fleet statistics are computed again in the background.
  await fleetInputsChangedByFit(params.id);
  return json(result);
};
