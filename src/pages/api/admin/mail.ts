import type { APIRoute } from 'astro';
import { desc } from 'drizzle-orm';
import { mailOutbox } from '../../../db/schema';
import { db } from '../../../lib/server/db';
import { json } from '../../../lib/server/http';
import { capturedMessages } from '../../../lib/server/mail-capture';

/** The outbox (queued / sent / failed) and, in demo, what the capture server received. */
export const GET: APIRoute = async () => {
  const outbox = await db().select().from(mailOutbox).orderBy(desc(mailOutbox.createdAt)).limit(200);
  let captured;
  try {
    captured = await capturedMessages();
  } catch (e) {
    captured = { error: String((e as Error).message) };
  }
  return json({ outbox, captured });
};
