import type { APIRoute } from 'astro';
import { json, problems } from '../../../../lib/server/http';
import { getUnit, SERIAL_PATTERN, unitHistory } from '../../../../lib/server/units';

/** Audit entries, sessions, fits and parameter sets of a unit, each newest first. */
export const GET: APIRoute = async ({ params }) => {
  const serial = params.serial ?? '';
  if (!SERIAL_PATTERN.test(serial)) return problems(404, `No unit with serial number ${serial}.`);
  const unit = await getUnit(serial);
  if (!unit) return problems(404, `No unit with serial number ${serial}.`);
  return json({ serial: unit.serial, ...(await unitHistory(unit.id)) });
};
