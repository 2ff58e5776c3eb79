import { index, integer, pgTable, text, timestamp } from 'drizzle-orm/pg-core';
import { createdAt, id } from './columns';

/**
 * Outgoing e-mail. Every message is written here first (in the same transaction as the change that causes
 * it) and delivered by a job of the mail queue (src/lib/server/mail.ts), so an approval stands even while the
 * mail server is down.
 */
export const mailOutbox = pgTable(
  'mail_outbox',
  {
    id: id(),
    to: text().notNull(),
    subject: text().notNull(),
    text: text().notNull(),
    html: text(),
    status: text().$type<'pending' | 'sent' | 'failed'>().notNull().default('pending'),
    attempts: integer().notNull().default(0),
    lastError: text(),
    nextAttemptAt: timestamp({ withTimezone: true }).notNull().defaultNow(),
    createdAt: createdAt(),
    sentAt: timestamp({ withTimezone: true }),
  },
  (t) => [index().on(t.status, t.nextAttemptAt)],
);
