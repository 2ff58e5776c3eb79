import { timestamp, uuid } from 'drizzle-orm/pg-core';

/** Primary key shared by every table: a random UUID made by PostgreSQL. */
export const id = () => uuid().primaryKey().defaultRandom();

/** Creation time, set by the database. */
export const createdAt = () => timestamp({ withTimezone: true }).notNull().defaultNow();
