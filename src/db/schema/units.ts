import { sql } from 'drizzle-orm';
import { boolean, date, index, pgTable, text, uniqueIndex, uuid } from 'drizzle-orm/pg-core';
import { armModelRevisions } from './arm-models';
import { createdAt, id } from './columns';
import { users } from './users';

/** One physical arm, by serial number. */
export const units = pgTable(
  'units',
  {
    id: id(),
    serial: text().notNull().unique(),
    modelRevisionId: uuid().notNull().references(() => armModelRevisions.id, { onDelete: 'restrict' }),
    site: text().notNull().default(''),
    cell: text().notNull().default(''),
    commissionedOn: date(),
    notes: text().notNull().default(''),
    /** Set by a drift alert until someone acknowledges it. */
    needsAttention: boolean().notNull().default(false),
    /**
     * What the search boxes match, kept by PostgreSQL: serial, site and cell in lower case. One LIKE over one
     * stored column instead of three ILIKEs: a search that matches thousands of units (a plant's code) cannot
     * narrow the rows by index and reads them all, about four times faster this way.
     */
    searchText: text()
      .notNull()
      .generatedAlwaysAs(sql`lower(serial || ' ' || site || ' ' || cell)`),
    createdBy: uuid().references(() => users.id),
    createdAt: createdAt(),
  },
  (t) => [
    // Serial numbers are unique whatever the letter case, also under concurrent registrations.
    uniqueIndex('units_serial_lower_unique').on(sql`lower(${t.serial})`),
    // A model's units (fleet, the list's model filter) without reading every unit.
    index('units_model_revision_idx').on(t.modelRevisionId, t.serial),
    // The search boxes (contains, any case) and the list's site filter: trigram indexes (pg_trgm).
    index('units_search_trgm').using('gin', t.searchText.op('gin_trgm_ops')),
    index('units_site_trgm').using('gin', t.site.op('gin_trgm_ops')),
  ],
);
