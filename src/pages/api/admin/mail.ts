import type { APIRoute } from 'astro';
import { json } from '../../../lib/server/http';
import { capturedOrError, outboxLog } from '../../../lib/server/outbox-log';

/** The outbox (queued / sent / failed) and, in demo, what the capture server received. */
export const GET: APIRoute = async () => {
  const outbox = await outboxLog(200);
  const capture = await capturedOrError();
  const captured = capture.error !== undefined ? { error: capture.error } : capture.messages;
  return json({ outbox, captured });
};
