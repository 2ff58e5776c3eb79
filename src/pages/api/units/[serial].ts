import type { APIRoute } from 'astro';
import { json, problems } from '../../../lib/server/http';
import { getUnit, SERIAL_PATTERN } from '../../../lib/server/units';

/** The unit with its model revision (geometry), current parameter set and counts. */
export const GET: APIRoute = async ({ params }) => {
  const serial = params.serial ?? '';
  if (!SERIAL_PATTERN.test(serial)) return problems(404, `No unit with serial number ${serial}.`);
  const unit = await getUnit(serial);
  if (!unit) return problems(404, `No unit with serial number ${serial}.`);
  return json(unit);
};
