/**
 * What the mail pages show: the outbox (queued / sent / failed), newest first, and — in demo and tests —
 * what the local capture server received. The sender itself is mail.ts.
 */
import { desc } from 'drizzle-orm';
import { mailOutbox } from '../../db/schema';
import { db as sharedDb, type Db } from './db';
import { capturedMessages, type CapturedMessage } from './mail-capture';

/** The newest `limit` outbox messages. */
export async function outboxLog(limit: number, database: Db = sharedDb()) {
  return database.select().from(mailOutbox).orderBy(desc(mailOutbox.createdAt)).limit(limit);
}

/** The capture server's messages (undefined when none is configured), or why they could not be read. */
export async function capturedOrError(): Promise<{ messages: CapturedMessage[] | undefined; error?: string }> {
  try {
    return { messages: await capturedMessages() };
  } catch (e) {
    return { messages: undefined, error: String((e as Error).message) };
  }
}
