import { index, integer, jsonb, pgTable, text, timestamp, uuid } from 'drizzle-orm/pg-core';
import type { FrameSpec } from '../../lib/engine/types';
import { armModelRevisions } from './arm-models';
import { createdAt, id } from './columns';
import { parameterSets } from './parameter-sets';
import { units } from './units';
import { users } from './users';

export const COMPENSATION_STATES = ['queued', 'running', 'done', 'failed'] as const;
export type CompensationState = (typeof COMPENSATION_STATES)[number];

/** What a compensation's page shows without reading its output file (bounded in size at any program size). */
export interface CompensationSummary {
  kind: 'cartesian' | 'joint';
  counts: Record<'reached' | 'unreachable' | 'outside-limits' | 'singular' | 'jump', number>;
  maxCorrectionMm: number;
  rmsCorrectionMm: number;
  /** Histogram of correction sizes (mm) over targets not unreachable / outside limits: bin edges and counts. */
  histogram: { edges: number[]; counts: number[] };
  /** The largest corrections, largest first (at most 200). */
  largest: { target: string; line: number; correctionMm: number; rotationDeg: number; status: string }[];
  /** Targets whose status is not "reached", in program order (at most 200), with the plain-words message. */
  notReached: { target: string; line: number; status: string; message: string }[];
  milliseconds: number;
  /**
   * The targets for the 3-D view (at most a few thousand; the largest corrections kept): original target
   * `p` and correction `e` = compensated − original (mm, robot base frame), calibrated joint values `q`.
   * Served apart from the summary (src/lib/server/compensations.ts compensationScene).
   */
  points?: { label: string; role: 'target'; p: [number, number, number]; e: [number, number, number]; q: number[] }[];
}

/**
 * One compensated program of a unit: the uploaded program and the compensated one in S3 (with SHA-256),
 * the parameter set and nominal revision used, who and when. A job: queued → running → done | failed.
 */
export const compensations = pgTable(
  'compensations',
  {
    id: id(),
    unitId: uuid().notNull().references(() => units.id, { onDelete: 'restrict' }),
    parameterSetId: uuid().notNull().references(() => parameterSets.id, { onDelete: 'restrict' }),
    nominalRevisionId: uuid().notNull().references(() => armModelRevisions.id, { onDelete: 'restrict' }),
    state: text().$type<CompensationState>().notNull().default('queued'),
    frame: text().$type<'base' | 'measurement'>().notNull(),
    tool: jsonb().$type<FrameSpec | null>(),
    targetCount: integer().notNull(),
    inputName: text().notNull(),
    inputKey: text().notNull().unique(),
    inputSha256: text().notNull(),
    inputBytes: integer().notNull(),
    outputKey: text().unique(),
    outputSha256: text(),
    outputBytes: integer(),
    summary: jsonb().$type<CompensationSummary>(),
    progress: jsonb().$type<{ done: number; total: number } | null>(),
    error: text(),
    attempts: integer().notNull().default(0),
    createdBy: uuid().notNull().references(() => users.id),
    createdAt: createdAt(),
    finishedAt: timestamp({ withTimezone: true }),
  },
  (t) => [index().on(t.unitId, t.createdAt), index().on(t.createdAt)],
);
