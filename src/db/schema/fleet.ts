import { boolean, index, integer, jsonb, pgTable, primaryKey, text, timestamp, uuid } from 'drizzle-orm/pg-core';
import type { FleetSnapshotSummary, FleetUnitResult } from '../../lib/shared/fleet-view';
import { armModels } from './arm-models';
import { createdAt, id } from './columns';
import { parameterSets } from './parameter-sets';
import { units } from './units';
import { users } from './users';

/** A unit's approved set drifted beyond tolerance from its previous one; open until acknowledged. */
export const driftAlerts = pgTable(
  'drift_alerts',
  {
    id: id(),
    unitId: uuid().notNull().references(() => units.id),
    parameterSetId: uuid().notNull().references(() => parameterSets.id),
    previousSetId: uuid().references(() => parameterSets.id),
    /**
     * Parameters beyond tolerance: key, change (angles wrapped at ±180°), tolerance, unit, the combined standard
     * error of the two sets and the change as a multiple of it, and which limits it crossed.
     */
    details: jsonb()
      .$type<{ key: string; change: number; tolerance: number; unit: string; combinedSe?: number | null; multiple?: number | null; crossed?: ('tolerance' | 'standard-error')[] }[]>()
      .notNull(),
    createdAt: createdAt(),
    acknowledgedBy: uuid().references(() => users.id),
    acknowledgedAt: timestamp({ withTimezone: true }),
    acknowledgeComment: text(),
  },
  (t) => [index().on(t.unitId)],
);

/** Every export of parameter files: who, which units and versions, when. */
export const exportLog = pgTable(
  'export_log',
  {
    id: id(),
    userId: uuid().notNull().references(() => users.id),
    kind: text().$type<'single' | 'batch' | 'compensation'>().notNull(),
    format: text().notNull(),
    items: jsonb().$type<{ serial: string; version: number; parameterSetId: string }[]>().notNull(),
    at: timestamp({ withTimezone: true }).notNull().defaultNow(),
  },
  // The log is read newest first, page by page: a backward scan of (at, id) gives ORDER BY at DESC, id DESC
  // exactly (an index declared DESC NULLS LAST would not match DESC, which puts nulls first).
  (t) => [index('export_log_at_id_idx').on(t.at, t.id)],
);

/**
 * A computed fleet judgement of one arm model (src/lib/server/fleet-snapshots.ts): what the fleet page and
 * API serve, so that no request computes the judgement of thousands of units. `fingerprint` identifies the
 * inputs it was computed from (the model's current sets and judgement settings); when the inputs' fingerprint
 * differs, a newer computation is due. Only the latest snapshot of a model is kept.
 */
export const fleetSnapshots = pgTable(
  'fleet_snapshots',
  {
    id: id(),
    modelId: uuid().notNull().references(() => armModels.id, { onDelete: 'cascade' }),
    fingerprint: text().notNull(),
    computedAt: timestamp({ withTimezone: true }).notNull().defaultNow(),
    durationMs: integer().notNull(),
    unitCount: integer().notNull(),
    /** Everything of the statistics but the per-unit rows (those are in fleet_snapshot_units). */
    summary: jsonb().$type<FleetSnapshotSummary>().notNull(),
  },
  (t) => [index('fleet_snapshots_model_computed_idx').on(t.modelId, t.computedAt)],
);

/** One unit's row of a fleet snapshot, numbered in the order pages list them: flagged units first, then by serial. */
export const fleetSnapshotUnits = pgTable(
  'fleet_snapshot_units',
  {
    snapshotId: uuid().notNull().references(() => fleetSnapshots.id, { onDelete: 'cascade' }),
    rank: integer().notNull(),
    unitId: uuid().notNull(),
    serial: text().notNull(),
    flagged: boolean().notNull(),
    data: jsonb().$type<FleetUnitResult>().notNull(),
  },
  (t) => [primaryKey({ columns: [t.snapshotId, t.rank] })],
);
