import { index, jsonb, pgTable, text, timestamp, uuid } from 'drizzle-orm/pg-core';
import { id } from './columns';
import { units } from './units';
import { users } from './users';

/** Every state change: who, when, what, comment. Shown on the unit's history. */
export const auditLog = pgTable(
  'audit_log',
  {
    id: id(),
    at: timestamp({ withTimezone: true }).notNull().defaultNow(),
    actorId: uuid().references(() => users.id),
    unitId: uuid().references(() => units.id),
    entityType: text().notNull(),
    entityId: uuid(),
    action: text().notNull(),
    comment: text(),
    details: jsonb().$type<Record<string, unknown>>(),
  },
  (t) => [index().on(t.unitId, t.at), index().on(t.entityType, t.entityId)],
);
