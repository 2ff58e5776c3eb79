import { index, integer, jsonb, pgTable, text, timestamp, uuid } from 'drizzle-orm/pg-core';
import { createdAt, id } from './columns';
import { users } from './users';

/** Events a webhook endpoint can subscribe to. */
export const WEBHOOK_EVENTS = ['parameter_set.approved', 'drift_alert.raised', 'fit.finished'] as const;
export type WebhookEvent = (typeof WEBHOOK_EVENTS)[number];

/**
 * Receivers an admin registered. The secret signs every delivery (HMAC-SHA256); it is kept because signing
 * needs it, and shown to the admin once. A removed endpoint keeps its row (the delivery log points to it)
 * and gets nothing more.
 */
export const webhookEndpoints = pgTable('webhook_endpoints', {
  id: id(),
  url: text().notNull(),
  events: text().array().$type<WebhookEvent[]>().notNull(),
  description: text().notNull().default(''),
  secret: text().notNull(),
  createdBy: uuid().references(() => users.id),
  createdAt: createdAt(),
  removedAt: timestamp({ withTimezone: true }),
});

/**
 * One event for one endpoint. Written in the transaction of the change that causes it (like mail_outbox);
 * the dispatcher hands pending rows to the job queue (queuedAt), the job posts and records each attempt.
 */
export const webhookDeliveries = pgTable(
  'webhook_deliveries',
  {
    id: id(),
    endpointId: uuid()
      .notNull()
      .references(() => webhookEndpoints.id),
    event: text().$type<WebhookEvent>().notNull(),
    /** The exact JSON text that is signed and sent. */
    body: text().notNull(),
    payload: jsonb().$type<Record<string, unknown>>().notNull(),
    state: text().$type<'pending' | 'delivered' | 'failed'>().notNull().default('pending'),
    attempts: integer().notNull().default(0),
    lastStatus: integer(),
    lastError: text(),
    createdAt: createdAt(),
    queuedAt: timestamp({ withTimezone: true }),
    lastAttemptAt: timestamp({ withTimezone: true }),
    deliveredAt: timestamp({ withTimezone: true }),
  },
  (t) => [index().on(t.state, t.queuedAt), index().on(t.createdAt)],
);
