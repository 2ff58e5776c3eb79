import { boolean, date, doublePrecision, index, integer, jsonb, pgTable, primaryKey, real, text, timestamp, unique, uuid } from 'drizzle-orm/pg-core';
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

/**
 * What the session page shows of the engine's checks (nominal error statistics, the plausibility verdicts,
 * pose-set quality and a decimated sample of poses for the charts and the 3-D view), computed once on an
 * engine thread and kept, so the page never redoes the whole-session work. `key` names the inputs beyond the
 * session's own (immutable) poses and revision: the judgement settings, the engine version and the sample
 * size; a row with another key is stale and is recomputed on the next read.
 */
export const sessionDigests = pgTable('session_digests', {
  sessionId: uuid()
    .primaryKey()
    .references(() => sessions.id, { onDelete: 'cascade' }),
  key: text().notNull(),
  body: jsonb().notNull(),
  computedAt: timestamp({ withTimezone: true }).notNull().defaultNow(),
});
