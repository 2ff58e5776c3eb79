import { sql } from 'drizzle-orm';
import { index, integer, jsonb, pgTable, text, timestamp, unique, uniqueIndex, uuid } from 'drizzle-orm/pg-core';
import type { ArmGeometry } from '../../lib/engine/types';
import { createdAt, id } from './columns';
import { fits } from './fits';
import { units } from './units';
import { users } from './users';

/**
 * What an approved set's exports and certificate say about the world at approval, frozen in the row so that
 * renaming a model, moving a unit or renaming a person later never changes the bytes of an approved set's
 * files. Filled by a BEFORE INSERT trigger (migrations) from the unit, the fit's session, its arm model
 * revision and the approver; immutable afterwards like the rest of the row.
 */
export interface FrozenFacts {
  serial: string;
  site: string;
  cell: string;
  modelId: string;
  modelName: string;
  manufacturer: string;
  revision: number;
  approverName: string;
  approverEmail: string;
  /** Who ran the fit and who submitted it for review (names at approval; '' when unknown). */
  runByName: string;
  submittedByName: string;
}

export const PARAMETER_SET_STATES = ['current', 'superseded'] as const;
export type ParameterSetState = (typeof PARAMETER_SET_STATES)[number];

/**
 * An approved geometry of a unit, versioned v1, v2, …. Never edited, never deleted: a trigger in the
 * migrations refuses DELETE and every UPDATE except current → superseded.
 */
export const parameterSets = pgTable(
  'parameter_sets',
  {
    id: id(),
    unitId: uuid().notNull().references(() => units.id, { onDelete: 'restrict' }),
    version: integer().notNull(),
    fitId: uuid().notNull().unique().references(() => fits.id, { onDelete: 'restrict' }),
    geometry: jsonb().$type<ArmGeometry>().notNull(),
    /** Standard errors by parameter key, carried from the fit for drift bands. */
    standardErrors: jsonb().$type<Record<string, number | null>>().notNull().default({}),
    state: text().$type<ParameterSetState>().notNull().default('current'),
    approvedBy: uuid().notNull().references(() => users.id),
    approvedAt: timestamp({ withTimezone: true }).notNull().defaultNow(),
    comment: text().notNull().default(''),
    /** Facts frozen at approval (trigger-filled; see FrozenFacts). */
    frozen: jsonb().$type<FrozenFacts>(),
    /** Running number of the calibration certificate, unique, given by the database at approval. */
    certificateNo: integer().generatedAlwaysAsIdentity().notNull().unique(),
    createdAt: createdAt(),
  },
  (t) => [
    unique().on(t.unitId, t.version),
    index().on(t.unitId, t.state),
    // At most one current set per unit, whatever the application does.
    uniqueIndex('parameter_sets_one_current').on(t.unitId).where(sql`state = 'current'`),
  ],
);
