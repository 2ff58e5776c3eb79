import type { APIRoute } from 'astro';
import { fleetInputsChanged } from '../../../../lib/server/fleet-snapshots';
import { isUuid, json, problems, readJson, zodProblems } from '../../../../lib/server/http';
import { judgementSchema, modelJudgement, setModelJudgement } from '../../../../lib/server/judgement';

/** The model's judgement settings: plausible change bounds, instrument noise, tool fixture (defaults until set). */
export const GET: APIRoute = async ({ params }) => {
  if (!isUuid(params.id)) return problems(404, 'No such arm model.');
  const s = await modelJudgement(params.id);
  if (!s) return problems(404, 'No such arm model.');
  return json(s);
};

/** Replace the settings (all four fields). Engineers and admins. */
export const PUT: APIRoute = async ({ params, request, locals }) => {
  if (!isUuid(params.id)) return problems(404, 'No such arm model.');
  const read = await readJson(request);
  if (!read.ok) return read.response;
  const parsed = judgementSchema.safeParse(read.value);
  if (!parsed.success) return problems(400, 'Invalid judgement settings.', zodProblems(parsed.error));
  const s = await setModelJudgement(params.id, parsed.data, locals.user!.id);
  if (!s) return problems(404, 'No such arm model.');
  // Whether the tool point is judged changes the fleet statistics: computed again in the background.
  await fleetInputsChanged(params.id);
  return json(s);
};
