import { boolean, date, doublePrecision, index, integer, jsonb, pgTable, primaryKey, real, text, unique, uuid } from 'drizzle-orm/pg-core';
import type { InputProblem } from '../../lib/engine/types';
import { armModelRevisions } from './arm-models';
import { createdAt, id } from './columns';
import { units } from './units';
import { users } from './users';

/** One measurement visit: the CSV stored unchanged in S3 plus its metadata and parsed poses. */
export const sessions = pgTable(
  'sessions',
  {
    id: id(),
    unitId: uuid().notNull().references(() => units.id, { onDelete: 'restrict' }),
    /** The model revision the poses were checked against at upload. */
    modelRevisionId: uuid().notNull().references(() => armModelRevisions.id),
    measuredOn: date().notNull(),
    technician: text().notNull().default(''),
    instrument: text().notNull().default(''),
    /** The instrument's stated measurement uncertainty as its own certificate gives it (free text, e.g. "±(15 µm + 6 µm/m), k = 2"). */
    instrumentUncertainty: text().notNull().default(''),
    ambientC: real(),
    target: text().notNull().default(''),
    notes: text().notNull().default(''),
    fileName: text().notNull(),
    fileKey: text().notNull().unique(),
    fileSha256: text().notNull(),
    fileBytes: integer().notNull(),
    poseCount: integer().notNull(),
    jointCount: integer().notNull(),
    hasSplit: boolean().notNull().default(false),
    repeatGroups: integer().notNull().default(0),
    outsideLimitsOverride: boolean().notNull().default(false),
    warnings: jsonb().$type<InputProblem[]>().notNull().default([]),
    uploadedBy: uuid().references(() => users.id),
    createdAt: createdAt(),
  },
  (t) => [unique().on(t.unitId, t.fileSha256), index().on(t.unitId, t.measuredOn)],
);

/** One row of a session: joint readings (deg / mm) and the tracker-measured point (mm). */
export const sessionPoses = pgTable(
  'session_poses',
  {
    sessionId: uuid().notNull().references(() => sessions.id, { onDelete: 'cascade' }),
    idx: integer().notNull(),
    line: integer().notNull(),
    label: text().notNull(),
    q: doublePrecision().array().notNull(),
    x: doublePrecision().notNull(),
    y: doublePrecision().notNull(),
    z: doublePrecision().notNull(),
    split: text().$type<'fit' | 'validate'>(),
    outsideLimits: boolean().notNull().default(false),
  },
  (t) => [primaryKey({ columns: [t.sessionId, t.idx] })],
);
