import { and, asc, eq, lte, sql } from 'drizzle-orm';
import nodemailer, { type Transporter } from 'nodemailer';
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
 * change does; the sender loop delivers it (and retries while the mail server is away).
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

const MAX_ATTEMPTS = 20;

/**
 * Deliver pending messages. Rows are claimed with FOR UPDATE SKIP LOCKED so several app instances can run
 * the loop at once without sending a message twice. Returns the number sent.
 */
export async function deliverPendingMail(database: Db = sharedDb(), limit = 20): Promise<number> {
  let sent = 0;
  for (let i = 0; i < limit; i++) {
    const done = await database.transaction(async (tx) => {
      const [row] = await tx
        .select()
        .from(mailOutbox)
        .where(and(eq(mailOutbox.status, 'pending'), lte(mailOutbox.nextAttemptAt, sql`now()`)))
        .orderBy(asc(mailOutbox.createdAt))
        .limit(1)
        .for('update', { skipLocked: true });
      if (!row) return 'empty' as const;
      try {
        await transport().sendMail({ from: config().MAIL_FROM, to: row.to, subject: row.subject, text: row.text, html: row.html ?? undefined });
        await tx.update(mailOutbox).set({ status: 'sent', sentAt: sql`now()`, attempts: row.attempts + 1, lastError: null }).where(eq(mailOutbox.id, row.id));
        return 'sent' as const;
      } catch (err) {
        const attempts = row.attempts + 1;
        // Back off: 2 s, 4 s, 8 s … capped at 5 minutes.
        const delayS = Math.min(300, 2 ** attempts);
        await tx
          .update(mailOutbox)
          .set({
            attempts,
            lastError: String((err as Error).message ?? err).slice(0, 500),
            status: attempts >= MAX_ATTEMPTS ? 'failed' : 'pending',
            nextAttemptAt: sql`now() + make_interval(secs => ${delayS})`,
          })
          .where(eq(mailOutbox.id, row.id));
        return 'failed' as const;
      }
    });
    if (done === 'empty' || done === 'failed') break;
    sent++;
  }
  return sent;
}

let timer: NodeJS.Timeout | undefined;
let running = false;

/** Start the background sender (idempotent). */
export function startMailSender(intervalMs = 1000) {
  if (timer) return;
  timer = setInterval(async () => {
    if (running) return;
    running = true;
    try {
      await deliverPendingMail();
    } catch {
      // Database away: the next tick tries again.
    } finally {
      running = false;
    }
  }, intervalMs);
  timer.unref();
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
