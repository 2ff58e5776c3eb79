import { boolean, doublePrecision, index, integer, jsonb, pgTable, primaryKey, text, timestamp, uuid } from 'drizzle-orm/pg-core';
import type { ArmGeometry } from '../../lib/engine/types';
import { createdAt, id } from './columns';
import { sessions } from './sessions';
import { units } from './units';
import { users } from './users';

export const FIT_STATES = ['queued', 'running', 'fitted', 'failed'] as const;
export type FitState = (typeof FIT_STATES)[number];
export const REVIEW_STATES = ['awaiting_review', 'approved', 'returned'] as const;
export type ReviewState = (typeof REVIEW_STATES)[number];

/** One identification run over a session with its settings; a job with a page. */
export const fits = pgTable(
  'fits',
  {
    id: id(),
    sessionId: uuid().notNull().references(() => sessions.id, { onDelete: 'restrict' }),
    unitId: uuid().notNull().references(() => units.id, { onDelete: 'restrict' }),
    /** The fit this one was re-run from (e.g. with outliers excluded); the old one is kept. */
    parentFitId: uuid(),
    state: text().$type<FitState>().notNull().default('queued'),
    settings: jsonb().$type<Record<string, unknown>>().notNull(),
    engineVersion: text(),
    /** SHA-256 of the session file and of the nominal geometry, so a fit can be reproduced. */
    inputChecksums: jsonb().$type<{ sessionFile: string; nominalGeometry: string }>(),
    progress: jsonb().$type<{ iteration: number; rmsMm: number; cost: number; worker?: string } | null>(),
    report: jsonb().$type<Record<string, unknown>>(),
    calibrated: jsonb().$type<ArmGeometry>(),
    error: text(),
    durationMs: integer(),
    attempts: integer().notNull().default(0),
    reviewState: text().$type<ReviewState>(),
    submittedBy: uuid().references(() => users.id),
    submittedAt: timestamp({ withTimezone: true }),
    decidedBy: uuid().references(() => users.id),
    decidedAt: timestamp({ withTimezone: true }),
    decisionComment: text(),
    /** Plausibility verdicts of the fitted result (src/lib/engine/plausibility.ts). */
    verdicts: jsonb().$type<Record<string, unknown>>(),
    /** The submitter's note to the reviewer. */
    submitNote: text(),
    /** Written override of an implausible verdict, by an engineer, shown to the reviewer. */
    overrideNote: text(),
    overrideBy: uuid().references(() => users.id),
    overrideAt: timestamp({ withTimezone: true }),
    /** Why the poses this fit excludes beyond its parent's were excluded (the refit's note). */
    exclusionNote: text(),
    createdBy: uuid().references(() => users.id),
    createdAt: createdAt(),
    startedAt: timestamp({ withTimezone: true }),
    finishedAt: timestamp({ withTimezone: true }),
  },
  (t) => [index().on(t.unitId, t.createdAt), index().on(t.sessionId), index().on(t.reviewState)],
);

/**
 * The per-pose part of a fit's report, one row per pose in file order, stored apart from the summary in
 * fits.report so that pages and the summary API stay small at any session size (served page by page).
 */
export const fitPoses = pgTable(
  'fit_poses',
  {
    fitId: uuid().notNull().references(() => fits.id, { onDelete: 'cascade' }),
    idx: integer().notNull(),
    label: text().notNull(),
    line: integer().notNull(),
    role: text().$type<'fit' | 'holdout' | 'excluded'>().notNull(),
    /** measured − predicted (mm) with the nominal and with the calibrated geometry. */
    beforeX: doublePrecision().notNull(),
    beforeY: doublePrecision().notNull(),
    beforeZ: doublePrecision().notNull(),
    afterX: doublePrecision().notNull(),
    afterY: doublePrecision().notNull(),
    afterZ: doublePrecision().notNull(),
    errorBefore: doublePrecision().notNull(),
    errorAfter: doublePrecision().notNull(),
    standardised: doublePrecision(),
    outlier: boolean().notNull(),
  },
  (t) => [primaryKey({ columns: [t.fitId, t.idx] }), index().on(t.fitId, t.errorAfter)],
);
