/**
 * The demo's compensated program: an invented drilling pattern (a 12 × 20 grid of holes, 25 mm pitch, on a
 * horizontal panel in front of the arm, tool pointing down, serpentine order so the path is continuous) for
 * demo unit LCS-R6-0102, compensated for its current parameter set at seed time (the same code the job runs).
 * Idempotent: a program with the same bytes for the unit is not stored twice.
 */
import { and, eq } from 'drizzle-orm';
import { createHash } from 'node:crypto';
import { armModelRevisions, compensations, parameterSets, units, users } from '../src/db/schema';
import { programCsv, type ProgramTarget } from '../src/lib/engine/program-csv';
import type { Db } from '../src/lib/server/db';
import { runCompensation, storeCompensation } from '../src/lib/server/compensations';

export const DEMO_PROGRAM_UNIT = 'LCS-R6-0102';
export const DEMO_PROGRAM_NAME = 'panel-drilling-240.csv';

/** 240 holes on a panel at z = 250 mm (robot base frame), x 650…925 mm, y −237.5…237.5 mm; rx = 180° (tool down). */
export function drillingProgram(jointCount: number): string {
  const targets: ProgramTarget[] = [];
  for (let row = 0; row < 12; row++) {
    for (let k = 0; k < 20; k++) {
      const col = row % 2 === 0 ? k : 19 - k;
      targets.push({ name: `D${String(row + 1).padStart(2, '0')}-${String(col + 1).padStart(2, '0')}`, line: targets.length + 2, pose: { x: 650 + 25 * row, y: -237.5 + 25 * col, z: 250, rx: 180, ry: 0, rz: 0 } });
    }
  }
  return programCsv(targets, jointCount);
}

export async function seedCompensation(db: Db, serial = DEMO_PROGRAM_UNIT): Promise<string> {
  const [unit] = await db.select({ id: units.id, revisionId: units.modelRevisionId }).from(units).where(eq(units.serial, serial));
  if (!unit) return 'demo program: unit not found, skipped';
  const [set] = await db.select({ id: parameterSets.id, geometry: parameterSets.geometry }).from(parameterSets).where(and(eq(parameterSets.unitId, unit.id), eq(parameterSets.state, 'current')));
  if (!set) return 'demo program: the unit has no current parameter set, skipped';
  const [rev] = await db.select({ id: armModelRevisions.id }).from(armModelRevisions).where(eq(armModelRevisions.id, unit.revisionId));
  const [eng] = await db.select({ id: users.id }).from(users).where(eq(users.email, 'engineer@example.com'));
  const bytes = Buffer.from(drillingProgram(set.geometry.joints.length));
  const sha = createHash('sha256').update(bytes).digest('hex');
  const [exists] = await db.select({ id: compensations.id }).from(compensations).where(and(eq(compensations.unitId, unit.id), eq(compensations.inputSha256, sha)));
  if (exists) return 'demo program: already there';
  const id = await storeCompensation({ unitId: unit.id, parameterSetId: set.id, nominalRevisionId: rev!.id, frame: 'base', name: DEMO_PROGRAM_NAME, bytes, targetCount: 240, actorId: eng!.id }, db);
  const outcome = await runCompensation(id, db);
  return `demo program: ${DEMO_PROGRAM_NAME} for ${serial} compensated (${outcome})`;
}
