/**
 * Signed webhooks. An admin registers endpoints (URL + events); every event is written as one delivery row
 * per subscribed endpoint in the transaction of the change that causes it (an approval stands even while a
 * receiver is down, and no delivery exists for a change that rolled back). A dispatcher hands pending rows
 * to the job queue (pg-boss queue "webhook"); the job posts the body and retries with backoff.
 *
 * Signature (documented in the README): headers
 *   offsetry-webhook-id         the delivery id (the same on every retry: receivers can de-duplicate)
 *   offsetry-webhook-timestamp  Unix seconds when this attempt was signed
 *   offsetry-webhook-signature  v1=<hex HMAC-SHA256(secret, `${timestamp}.${body}`)>
 * Receivers recompute the HMAC over the raw body, compare in constant time, and refuse old timestamps.
 */
import { and, count, desc, eq, inArray, isNull, sql } from 'drizzle-orm';
import { createHmac, randomBytes, randomUUID, timingSafeEqual } from 'node:crypto';
import type PgBoss from 'pg-boss';
import { z } from 'zod';
import { WEBHOOK_EVENTS, webhookDeliveries, webhookEndpoints, type WebhookEvent } from '../../db/schema/webhooks';
import { audit } from './audit';
import { db as sharedDb, type Db } from './db';
import { log } from './log';

export { WEBHOOK_EVENTS, type WebhookEvent };
type Conn = Db | Parameters<Parameters<Db['transaction']>[0]>[0];

export const WEBHOOK_QUEUE = 'webhook';
export const SIGNATURE_HEADER = 'offsetry-webhook-signature';
export const TIMESTAMP_HEADER = 'offsetry-webhook-timestamp';
export const ID_HEADER = 'offsetry-webhook-id';
export const EVENT_HEADER = 'offsetry-webhook-event';

const timingSchema = z.object({
  /** Attempts after the first (pg-boss retryLimit). */
  WEBHOOK_RETRY_LIMIT: z.coerce.number().int().min(0).max(20).default(8),
  /** First retry after this many seconds, doubling each time (pg-boss retryBackoff). */
  WEBHOOK_RETRY_DELAY_SECONDS: z.coerce.number().int().min(1).max(3600).default(5),
  WEBHOOK_TIMEOUT_SECONDS: z.coerce.number().int().min(1).max(120).default(10),
  WEBHOOK_DISPATCH_SECONDS: z.coerce.number().min(0.2).max(60).default(1),
});
function timing() {
  const env = Object.fromEntries(Object.entries(process.env).filter(([k, v]) => k.startsWith('WEBHOOK_') && v !== ''));
  return timingSchema.parse(env);
}

export const webhookCreateSchema = z.strictObject({
  url: z
    .url({ protocol: /^https?$/, error: 'url must be an http:// or https:// address' })
    .max(2000, 'url is at most 2000 characters'),
  events: z
    .array(z.enum(WEBHOOK_EVENTS, { error: `each event must be one of ${WEBHOOK_EVENTS.join(', ')}` }), { error: `events is required: a list of ${WEBHOOK_EVENTS.join(', ')}` })
    .min(1, 'choose at least one event')
    .refine((e) => new Set(e).size === e.length, 'an event is listed twice'),
  description: z.string({ error: 'description must be text' }).trim().max(200, 'description is at most 200 characters').default(''),
});

export const webhookDeliveryQuerySchema = z.strictObject({
  endpoint: z.uuid({ error: 'endpoint must be a webhook endpoint id' }).optional(),
  page: z.coerce.number({ error: 'page must be a whole number ≥ 1' }).int('page must be a whole number ≥ 1').min(1, 'page must be a whole number ≥ 1').max(100_000).default(1),
  pageSize: z.coerce.number({ error: 'pageSize must be a whole number from 1 to 200' }).int().min(1).max(200).default(50),
});

const endpointColumns = {
  id: webhookEndpoints.id,
  url: webhookEndpoints.url,
  events: webhookEndpoints.events,
  description: webhookEndpoints.description,
  createdAt: webhookEndpoints.createdAt,
  removedAt: webhookEndpoints.removedAt,
};
type EndpointRow = { id: string; url: string; events: WebhookEvent[]; description: string; createdAt: Date; removedAt: Date | null };
const view = (e: EndpointRow) => ({ ...e, active: e.removedAt === null, createdAt: e.createdAt.toISOString(), removedAt: e.removedAt?.toISOString() ?? null });

export async function listWebhookEndpoints(database: Db = sharedDb()) {
  const rows = await database.select(endpointColumns).from(webhookEndpoints).orderBy(desc(webhookEndpoints.createdAt));
  return rows.map(view);
}

export async function createWebhookEndpoint(input: z.output<typeof webhookCreateSchema>, actorId: string, database: Db = sharedDb()) {
  const secret = `whsec_${randomBytes(32).toString('base64url')}`;
  return database.transaction(async (tx) => {
    const [row] = await tx.insert(webhookEndpoints).values({ url: input.url, events: input.events, description: input.description, secret, createdBy: actorId }).returning(endpointColumns);
    await audit(tx, { actorId, unitId: null, entityType: 'webhook', entityId: row!.id, action: 'webhook.registered', details: { url: input.url, events: input.events } });
    return { endpoint: view(row!), secret };
  });
}

/** Remove an endpoint: it gets nothing more; deliveries still waiting for it are closed as failed. */
export async function removeWebhookEndpoint(id: string, actorId: string, database: Db = sharedDb()) {
  return database.transaction(async (tx) => {
    const [row] = await tx.update(webhookEndpoints).set({ removedAt: sql`now()` }).where(and(eq(webhookEndpoints.id, id), isNull(webhookEndpoints.removedAt))).returning({ id: webhookEndpoints.id, url: webhookEndpoints.url });
    if (!row) return false;
    await tx
      .update(webhookDeliveries)
      .set({ state: 'failed', lastError: 'endpoint removed before delivery' })
      .where(and(eq(webhookDeliveries.endpointId, id), eq(webhookDeliveries.state, 'pending')));
    await audit(tx, { actorId, unitId: null, entityType: 'webhook', entityId: id, action: 'webhook.removed', details: { url: row.url } });
    return true;
  });
}

export async function listWebhookDeliveries(query: z.output<typeof webhookDeliveryQuerySchema>, database: Db = sharedDb()) {
  const where = query.endpoint ? eq(webhookDeliveries.endpointId, query.endpoint) : undefined;
  const [{ total } = { total: 0 }] = await database.select({ total: count() }).from(webhookDeliveries).where(where);
  const rows = await database
    .select({
      id: webhookDeliveries.id,
      endpointId: webhookDeliveries.endpointId,
      url: webhookEndpoints.url,
      event: webhookDeliveries.event,
      state: webhookDeliveries.state,
      attempts: webhookDeliveries.attempts,
      lastStatus: webhookDeliveries.lastStatus,
      lastError: webhookDeliveries.lastError,
      createdAt: webhookDeliveries.createdAt,
      lastAttemptAt: webhookDeliveries.lastAttemptAt,
      deliveredAt: webhookDeliveries.deliveredAt,
    })
    .from(webhookDeliveries)
    .innerJoin(webhookEndpoints, eq(webhookEndpoints.id, webhookDeliveries.endpointId))
    .where(where)
    .orderBy(desc(webhookDeliveries.createdAt), desc(webhookDeliveries.id))
    .limit(query.pageSize)
    .offset((query.page - 1) * query.pageSize);
  const iso = (d: Date | null) => d?.toISOString() ?? null;
  return {
    deliveries: rows.map((r) => ({ ...r, createdAt: r.createdAt.toISOString(), lastAttemptAt: iso(r.lastAttemptAt), deliveredAt: iso(r.deliveredAt) })),
    total,
    page: query.page,
    pageSize: query.pageSize,
  };
}

/**
 * Record an event for every active endpoint subscribed to it, inside the caller's transaction. The body is
 * fixed here (the same bytes on every attempt): `{ id, type, createdAt, data }`.
 */
export async function recordWebhookEvent(tx: Conn, type: WebhookEvent, data: Record<string, unknown>) {
  const endpoints = await tx
    .select({ id: webhookEndpoints.id })
    .from(webhookEndpoints)
    .where(and(isNull(webhookEndpoints.removedAt), sql`${type} = any(${webhookEndpoints.events})`));
  if (!endpoints.length) return 0;
  const payload = { id: randomUUID(), type, createdAt: new Date().toISOString(), data };
  const body = JSON.stringify(payload);
  await tx.insert(webhookDeliveries).values(endpoints.map((e) => ({ endpointId: e.id, event: type, body, payload })));
  return endpoints.length;
}

/** `v1=` + hex HMAC-SHA256 of `${timestamp}.${body}` with the endpoint's secret. */
export function webhookSignature(secret: string, timestamp: number | string, body: string) {
  return 'v1=' + createHmac('sha256', secret).update(`${timestamp}.${body}`).digest('hex');
}

/** The receiver's check (the README's recipe in code): signature over timestamp + raw body, and freshness. */
export function verifyWebhook(secret: string, headers: { signature?: string | null; timestamp?: string | null }, rawBody: string, toleranceSeconds = 300, now = Date.now()) {
  const ts = Number(headers.timestamp);
  if (!headers.signature || !Number.isInteger(ts)) return false;
  if (Math.abs(now / 1000 - ts) > toleranceSeconds) return false;
  const expected = Buffer.from(webhookSignature(secret, ts, rawBody));
  return headers.signature.split(/[ ,]+/).some((candidate) => {
    const got = Buffer.from(candidate);
    return got.length === expected.length && timingSafeEqual(got, expected);
  });
}

// ---- sending -----------------------------------------------------------------------------------------------

interface WebhookJob {
  deliveryId: string;
}

/** One attempt. Returns true when delivered (or nothing is left to do); throws for a retry. */
async function attempt(deliveryId: string, retryCount: number, retryLimit: number, database: Db) {
  const [row] = await database
    .select({ d: webhookDeliveries, url: webhookEndpoints.url, secret: webhookEndpoints.secret, removedAt: webhookEndpoints.removedAt })
    .from(webhookDeliveries)
    .innerJoin(webhookEndpoints, eq(webhookEndpoints.id, webhookDeliveries.endpointId))
    .where(eq(webhookDeliveries.id, deliveryId));
  if (!row || row.d.state !== 'pending') return true;
  if (row.removedAt) {
    await database.update(webhookDeliveries).set({ state: 'failed', lastError: 'endpoint removed before delivery' }).where(and(eq(webhookDeliveries.id, deliveryId), eq(webhookDeliveries.state, 'pending')));
    return true;
  }
  const timestamp = Math.floor(Date.now() / 1000);
  let status: number | null = null;
  let error: string | null = null;
  try {
    const res = await fetch(row.url, {
      method: 'POST',
      headers: {
        'content-type': 'application/json',
        'user-agent': 'Offsetry-Webhooks/1',
        [ID_HEADER]: row.d.id,
        [EVENT_HEADER]: row.d.event,
        [TIMESTAMP_HEADER]: String(timestamp),
        [SIGNATURE_HEADER]: webhookSignature(row.secret, timestamp, row.d.body),
      },
      body: row.d.body,
      redirect: 'manual',
      signal: AbortSignal.timeout(timing().WEBHOOK_TIMEOUT_SECONDS * 1000),
    });
    status = res.status;
    await res.body?.cancel().catch(() => {});
    if (status < 200 || status > 299) error = `receiver answered ${status}`;
  } catch (e) {
    const err = e as Error & { cause?: { code?: string; message?: string } };
    error = err.cause?.code ? `${err.cause.code}: ${err.cause.message ?? err.message}` : String(err.message ?? err);
  }
  const delivered = error === null;
  const last = !delivered && retryCount >= retryLimit;
  await database
    .update(webhookDeliveries)
    .set({
      attempts: sql`${webhookDeliveries.attempts} + 1`,
      lastStatus: status,
      lastError: error,
      lastAttemptAt: sql`now()`,
      ...(delivered ? { state: 'delivered' as const, deliveredAt: sql`now()` } : last ? { state: 'failed' as const } : {}),
    })
    .where(and(eq(webhookDeliveries.id, deliveryId), eq(webhookDeliveries.state, 'pending')));
  if (delivered || last) return true;
  throw new Error(error ?? 'not delivered');
}

let started = false;
let dispatchTimer: NodeJS.Timeout | undefined;

async function queue(): Promise<PgBoss> {
  const { ensureQueue, jobQueue } = await import('./job-queue');
  const boss = await jobQueue();
  const t = timing();
  await ensureQueue(boss, { name: WEBHOOK_QUEUE, policy: 'stately', retryLimit: t.WEBHOOK_RETRY_LIMIT, retryDelay: t.WEBHOOK_RETRY_DELAY_SECONDS, retryBackoff: true, expireInSeconds: t.WEBHOOK_TIMEOUT_SECONDS * 3 + 30 });
  return boss;
}

/** Hand pending, not yet queued deliveries to the job queue (rows locked so instances never double-send). */
export async function dispatchWebhooks(database: Db = sharedDb()) {
  const boss = await queue();
  // A job lost without a final attempt (its worker died on the last try) leaves its row pending: after two
  // hours without an attempt — longer than the whole backoff — it is handed to the queue again.
  await database
    .update(webhookDeliveries)
    .set({ queuedAt: null })
    .where(
      and(
        eq(webhookDeliveries.state, 'pending'),
        sql`${webhookDeliveries.queuedAt} < now() - interval '2 hours'`,
        sql`coalesce(${webhookDeliveries.lastAttemptAt}, ${webhookDeliveries.queuedAt}) < now() - interval '2 hours'`,
      ),
    );
  return database.transaction(async (tx) => {
    const rows = await tx
      .select({ id: webhookDeliveries.id })
      .from(webhookDeliveries)
      .where(and(eq(webhookDeliveries.state, 'pending'), isNull(webhookDeliveries.queuedAt)))
      .orderBy(webhookDeliveries.createdAt)
      .limit(100)
      .for('update', { skipLocked: true });
    if (!rows.length) return 0;
    for (const r of rows) await boss.send(WEBHOOK_QUEUE, { deliveryId: r.id } satisfies WebhookJob, { singletonKey: r.id });
    await tx.update(webhookDeliveries).set({ queuedAt: sql`now()` }).where(inArray(webhookDeliveries.id, rows.map((r) => r.id)));
    return rows.length;
  });
}

/** Start the dispatcher and a sender in this process (idempotent); keeps trying while PostgreSQL is away. */
export function startWebhookSender() {
  if (started) return;
  started = true;
  void import('./job-queue').then(({ startWhenReady }) =>
    startWhenReady('webhook sender', async () => {
      const boss = await queue();
      await boss.work<WebhookJob>(WEBHOOK_QUEUE, { batchSize: 1, includeMetadata: true, pollingIntervalSeconds: 1 }, async ([job]) => {
        if (!job?.data?.deliveryId || !z.uuid().safeParse(job.data.deliveryId).success) return;
        try {
          await attempt(job.data.deliveryId, job.retryCount, job.retryLimit, sharedDb());
        } catch (err) {
          log('info', 'webhook attempt failed', { deliveryId: job.data.deliveryId, attempt: job.retryCount + 1, error: String((err as Error).message) });
          throw err;
        }
      });
      const t = timing();
      dispatchTimer = setInterval(() => void dispatchWebhooks().catch((err) => log('warn', 'webhook dispatch failed', { error: String(err) })), t.WEBHOOK_DISPATCH_SECONDS * 1000);
      dispatchTimer.unref();
      log('info', 'webhook sender started', {});
    }),
  );
}
