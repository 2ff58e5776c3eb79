import { index, jsonb, pgTable, text, timestamp, uuid } from 'drizzle-orm/pg-core';
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
export const exportLog = pgTable('export_log', {
  id: id(),
  userId: uuid().notNull().references(() => users.id),
  kind: text().$type<'single' | 'batch' | 'compensation'>().notNull(),
  format: text().notNull(),
  items: jsonb().$type<{ serial: string; version: number; parameterSetId: string }[]>().notNull(),
  at: timestamp({ withTimezone: true }).notNull().defaultNow(),
});
