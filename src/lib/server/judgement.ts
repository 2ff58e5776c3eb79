/**
 * Per-model settings of the judgements (plausibility bounds, instrument noise, tool fixture), editable by
 * engineers; the rules themselves live in src/lib/engine/plausibility.ts and fleet-judgement.ts.
 */
import { eq } from 'drizzle-orm';
import { z } from 'zod';
import { armModelRevisions, armModels, units } from '../../db/schema';
import { DEFAULT_JUDGEMENT, type JudgementSettings } from '../engine/plausibility';
import { audit } from './audit';
import { db as sharedDb, type Db } from './db';

type Conn = Db | Parameters<Parameters<Db['transaction']>[0]>[0];

const positive = (what: string, unit: string, max: number) =>
  z.number({ error: `${what} must be a number (${unit})` }).finite().positive(`${what} must be greater than 0 ${unit}`).max(max, `${what} must be at most ${max} ${unit}`);

export const judgementSchema = z.strictObject({
  lengthBoundMm: positive('lengthBoundMm', 'mm', 1000),
  angleBoundDeg: positive('angleBoundDeg', 'deg', 90),
  instrumentNoiseMm: positive('instrumentNoiseMm', 'mm', 10),
  toolFixture: z.boolean({ error: 'toolFixture must be true or false' }),
});

const merge = (stored: JudgementSettings | null | undefined): JudgementSettings => ({ ...DEFAULT_JUDGEMENT, ...(stored ?? {}) });

export async function modelJudgement(modelId: string, database: Conn = sharedDb()) {
  const [m] = await database.select({ id: armModels.id, judgement: armModels.judgement }).from(armModels).where(eq(armModels.id, modelId));
  if (!m) return undefined;
  return { modelId: m.id, settings: merge(m.judgement), defaults: m.judgement === null, defaultSettings: DEFAULT_JUDGEMENT };
}

/** The settings that apply to a unit (through its model revision). */
export async function unitJudgement(unitId: string, database: Conn = sharedDb()): Promise<JudgementSettings> {
  const [row] = await database
    .select({ judgement: armModels.judgement })
    .from(units)
    .innerJoin(armModelRevisions, eq(armModelRevisions.id, units.modelRevisionId))
    .innerJoin(armModels, eq(armModels.id, armModelRevisions.modelId))
    .where(eq(units.id, unitId));
  return merge(row?.judgement);
}

export async function setModelJudgement(modelId: string, s: JudgementSettings, actorId: string, database: Db = sharedDb()) {
  return database.transaction(async (tx) => {
    const [before] = await tx.select({ judgement: armModels.judgement }).from(armModels).where(eq(armModels.id, modelId)).for('update');
    if (!before) return undefined;
    await tx.update(armModels).set({ judgement: s }).where(eq(armModels.id, modelId));
    await audit(tx, { actorId, entityType: 'arm_model', entityId: modelId, action: 'judgement.updated', details: { before: merge(before.judgement), after: s } });
    return modelJudgement(modelId, tx);
  });
}
