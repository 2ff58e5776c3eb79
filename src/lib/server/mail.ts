/**
 * Outgoing mail. Every message is a mail_outbox row written in the transaction of the change that causes it;
 * each app instance's dispatcher hands due rows to the job queue (pg-boss queue "mail", one job per row, the
 * row's id as the job's id) and the job sends it over SMTP, retrying with backoff while the server is away.
 * The row stays the record: status, attempts, last error and the earliest next attempt.
 */
import { and, asc, eq, lte, sql } from 'drizzle-orm';
import nodemailer, { type Transporter } from 'nodemailer';
import type PgBoss from 'pg-boss';
import { z } from 'zod';
import { mailOutbox } from '../../db/schema';
import { config } from './config';
import { db as sharedDb, type Db } from './db';

export interface OutgoingMail {
  to: string;
  subject: string;
  text: string;
  html?: string;
}

type Tx = Pick<Db, 'insert'>;

/**
 * Queue a message. Pass the transaction of the change that causes it, so the mail exists exactly when the
 * change does; the mail queue delivers it (and retries while the mail server is away).
 */
export async function enqueueMail(tx: Tx, mail: OutgoingMail | OutgoingMail[]) {
  const list = Array.isArray(mail) ? mail : [mail];
  if (list.length) await tx.insert(mailOutbox).values(list);
}

let transporter: Transporter | undefined;
function transport(): Transporter {
  const c = config();
  transporter ??= nodemailer.createTransport({
    host: c.SMTP_HOST,
    port: c.SMTP_PORT,
    secure: c.SMTP_SECURE,
    auth: c.SMTP_USER ? { user: c.SMTP_USER, pass: c.SMTP_PASS ?? '' } : undefined,
    // The local capture server speaks plain SMTP; a real relay on 587 upgrades with STARTTLS.
    ignoreTLS: !c.SMTP_SECURE && c.SMTP_HOST === '127.0.0.1',
    connectionTimeout: 5000,
    greetingTimeout: 5000,
  });
  return transporter;
}

export const MAIL_QUEUE = 'mail';

/**
 * Retries of one message (pg-boss): after the first attempt, up to 11 more; with retryBackoff the n-th retry
 * waits retryDelay·2^(n−1) to twice that (pg-boss adds the jitter), so 2–4 s, 4–8 s, … and the last comes
 * about 1–2 hours after the first attempt. Expiry covers a batch of ten slow attempts (5 s connect, 5 s greeting).
 */
const MAIL_RETRY = { retryLimit: 11, retryDelay: 2, retryBackoff: true } as const;
const MAIL_EXPIRE_SECONDS = 300;

interface MailJob {
  outboxId: string;
}

async function mailQueue(): Promise<PgBoss> {
  const { ensureQueue, jobQueue } = await import('./job-queue');
  const boss = await jobQueue();
  await ensureQueue(boss, { name: MAIL_QUEUE, policy: 'standard', ...MAIL_RETRY, expireInSeconds: MAIL_EXPIRE_SECONDS });
  return boss;
}

/**
 * One attempt at one outbox row (the row is the record; its job carries only the id). The row is locked while
 * the message goes out, so it is never sent twice at once. Returns the error of a failed attempt, else null
 * (sent, or nothing to do). `retryCount` is the job's retries so far; on the last one a failure is final.
 */
export async function attemptMail(outboxId: string, retryCount: number, last: boolean, database: Db = sharedDb()): Promise<string | null> {
  return database.transaction(async (tx) => {
    const [row] = await tx
      .select()
      .from(mailOutbox)
      .where(and(eq(mailOutbox.id, outboxId), eq(mailOutbox.status, 'pending')))
      .for('update', { skipLocked: true });
    if (!row) return null;
    try {
      await transport().sendMail({ from: config().MAIL_FROM, to: row.to, subject: row.subject, text: row.text, html: row.html ?? undefined });
    } catch (err) {
      const error = String((err as Error).message ?? err).slice(0, 500);
      // The earliest moment pg-boss retries it (see MAIL_RETRY), for the admin's outbox page.
      const delayS = MAIL_RETRY.retryDelay * 2 ** Math.min(16, retryCount);
      await tx
        .update(mailOutbox)
        .set({ attempts: row.attempts + 1, lastError: error, status: last ? 'failed' : 'pending', nextAttemptAt: sql`now() + make_interval(secs => ${delayS})` })
        .where(eq(mailOutbox.id, row.id));
      return error;
    }
    await tx.update(mailOutbox).set({ status: 'sent', sentAt: sql`now()`, attempts: row.attempts + 1, lastError: null }).where(eq(mailOutbox.id, row.id));
    return null;
  });
}

const localWorkers: string[] = [];

/**
 * Hand due outbox rows to the queue. The job's id is the row's id, so a row that already has a job (waiting,
 * running or waiting for its retry) is not queued again: pg-boss skips the duplicate id. Rows written by any
 * process (in the transaction of their change) are picked up here. Returns the number queued.
 */
export async function dispatchMail(database: Db = sharedDb()): Promise<number> {
  const boss = await mailQueue();
  const due = await database
    .select({ id: mailOutbox.id })
    .from(mailOutbox)
    .where(and(eq(mailOutbox.status, 'pending'), lte(mailOutbox.nextAttemptAt, sql`now()`)))
    .orderBy(asc(mailOutbox.createdAt))
    .limit(100);
  let queued = 0;
  for (const r of due) if (await boss.send(MAIL_QUEUE, { outboxId: r.id } satisfies MailJob, { id: r.id })) queued++;
  if (queued) for (const w of localWorkers) boss.notifyWorker(w);
  return queued;
}

let started = false;

/** Start the dispatcher and a sender in this process (idempotent); keeps trying while PostgreSQL is away. */
export function startMailSender(intervalMs = 1000) {
  if (started) return;
  started = true;
  void import('./job-queue').then(({ startWhenReady }) =>
    startWhenReady('mail sender', async () => {
      const boss = await mailQueue();
      localWorkers.push(
        await boss.work<MailJob>(MAIL_QUEUE, { batchSize: 10, includeMetadata: true, pollingIntervalSeconds: 1 }, async (jobs) => {
          for (const job of jobs) {
            if (!job.data?.outboxId || !z.uuid().safeParse(job.data.outboxId).success) continue;
            const error = await attemptMail(job.data.outboxId, job.retryCount, job.retryCount >= job.retryLimit);
            // A failed attempt fails its own job (pg-boss schedules the retry); the rest of the batch completes.
            if (error) await boss.fail(MAIL_QUEUE, job.id, { message: error });
          }
        }),
      );
      let dispatching = false;
      const timer = setInterval(() => {
        if (dispatching) return;
        dispatching = true;
        // Database away: the next tick tries again.
        void dispatchMail()
          .catch(() => {})
          .finally(() => (dispatching = false));
      }, intervalMs);
      timer.unref();
    }),
  );
}

export function escapeHtml(s: string) {
  return s.replace(/[&<>"']/g, (c) => ({ '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;', "'": '&#39;' })[c]!);
}

/** A plain, consistent message body: greeting, lines, one link. */
export function composeMail(to: string, subject: string, lines: string[], link?: { label: string; url: string }): OutgoingMail {
  const text = [...lines, ...(link ? ['', `${link.label}: ${link.url}`] : []), '', '— Offsetry'].join('\n');
  const html =
    lines.map((l) => `<p>${escapeHtml(l)}</p>`).join('') +
    (link ? `<p><a href="${escapeHtml(link.url)}">${escapeHtml(link.label)}</a></p>` : '') +
    '<p style="color:#8a94a6">— Offsetry</p>';
  return { to, subject, text, html };
}
