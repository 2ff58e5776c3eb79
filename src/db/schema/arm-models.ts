import { sql } from 'drizzle-orm';
import { bigint, integer, jsonb, pgTable, text, unique, uniqueIndex, uuid } from 'drizzle-orm/pg-core';
import type { ArmGeometry } from '../../lib/engine/types';
import { createdAt, id } from './columns';
import { users } from './users';

/**
 * Drift tolerances per parameter group (mm for lengths/base/tool position, deg for angles). `base: null`
 * leaves the base frame out of drift checks: it is where the tracker stood, which differs every visit unless
 * the tracker has a fixed mount in the cell.
 */
export interface GroupTolerances {
  lengths: number;
  twists: number;
  offsets: number;
  beta: number;
  base: number | null;
  tool: number;
}

/**
 * Per-model settings of the judgements an engineer may edit (defaults in src/lib/engine/plausibility.ts):
 * plausible parameter change from nominal (mm, deg), the instrument's stated noise (mm, 1σ per coordinate),
 * and whether the tool is a fixed fixture (then the fleet view judges the tool point too).
 */
export interface JudgementSettings {
  lengthBoundMm: number;
  angleBoundDeg: number;
  instrumentNoiseMm: number;
  toolFixture: boolean;
}

/** A model type (for example a 6-axis articulated arm); its geometry lives in revisions. */
export const armModels = pgTable(
  'arm_models',
  {
    id: id(),
    name: text().notNull().unique(),
    manufacturer: text().notNull().default(''),
    description: text().notNull().default(''),
    tolerances: jsonb().$type<GroupTolerances>(),
    judgement: jsonb().$type<JudgementSettings>(),
    /**
     * Counts changes of what the fleet statistics are computed from: a trigger (migrations) adds one whenever a
     * parameter set of one of the model's units is inserted or changes state, or the judgement settings change.
     */
    fleetInputsVersion: bigint({ mode: 'number' }).notNull().default(0),
    createdBy: uuid().references(() => users.id),
    createdAt: createdAt(),
  },
  (t) => [uniqueIndex('arm_models_name_lower_unique').on(sql`lower(${t.name})`)],
);

/** Nominal geometry revision r1, r2, …; a revision a unit uses is never changed: edits make a new one. */
export const armModelRevisions = pgTable(
  'arm_model_revisions',
  {
    id: id(),
    modelId: uuid().notNull().references(() => armModels.id, { onDelete: 'restrict' }),
    revision: integer().notNull(),
    geometry: jsonb().$type<ArmGeometry>().notNull(),
    note: text().notNull().default(''),
    createdBy: uuid().references(() => users.id),
    createdAt: createdAt(),
  },
  (t) => [unique().on(t.modelId, t.revision)],
);
