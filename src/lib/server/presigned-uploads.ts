/**
 * Presigned session uploads: big session files go from the browser straight to S3, so app instances never
 * hold their bodies.
 *
 *   1. POST /api/sessions/uploads { unit, fileName, bytes, sha256, …metadata }  → { uploadId, url, key, … }
 *      The browser PUTs the file to `url` (a presigned S3 PUT) under the staging key
 *      uploads/{unit}/{id}/{name}.
 *   2. POST /api/sessions/uploads { uploadId, complete: true, …metadata }       → 201 like POST /api/sessions
 *      The server checks the staging object's size and SHA-256 against what step 1 declared, streams it
 *      through the same parser and checks as the direct upload (session-intake.ts checkAndStore), copies it to the
 *      session's key inside the store and writes the rows in one transaction. The staging object is deleted
 *      whatever the outcome, so a refusal leaves nothing behind.
 *
 * The pending upload is not a database row: its state (staging id, unit, file name, size, SHA-256, user,
 * expiry) is signed into the uploadId with HMAC-SHA-256 under AUTH_SECRET. Any app instance can complete
 * any upload without shared state, nothing needs cleaning up in PostgreSQL, and a completed upload cannot be
 * completed twice because its staging object is gone. Staging objects of uploads that were never completed
 * stay under uploads/: give the bucket a lifecycle rule that expires that prefix after a day.
 */
import { GetObjectCommand, HeadObjectCommand } from '@aws-sdk/client-s3';
import { createHash, createHmac, randomUUID, timingSafeEqual } from 'node:crypto';
import type { Readable } from 'node:stream';
import { z } from 'zod';
import { config } from './config';
import { db as sharedDb, type Db } from './db';
import { log } from './log';
import { bucket, deleteObject, presignPut, s3 } from './s3';
import {
  FIELD_EXPECTED,
  fileNameProblem,
  metaProblems,
  refusal,
  sanitiseFileName,
  sessionMetaSchema,
  type CreateSessionResult,
  type Uploader,
} from './session-form';
import { checkAndStore } from './session-intake';
import { duplicateRefusal, duplicateSession, unitForUpload } from './session-store';
import { formatBytes, sessionUrl } from '../shared/display';
import type { UploadProblem, UploadRefusal } from '../shared/upload';

/** How long the presigned PUT URL is valid. */
export const PRESIGNED_URL_SECONDS = 15 * 60;
/** How long an upload can be completed after it was started (the PUT itself must start within the URL's life). */
export const UPLOAD_TICKET_SECONDS = 2 * 3600;
/** The content type the PUT must send (it is part of the signature). */
export const UPLOAD_CONTENT_TYPE = 'text/csv';

/**
 * S3_PRESIGNED_UPLOADS=false turns the presigned path off (e.g. a store the browsers cannot reach); the
 * upload form then sends files through the app as before.
 */
export function presignedUploadsEnabled(): boolean {
  const v = (process.env.S3_PRESIGNED_UPLOADS ?? '').trim().toLowerCase();
  return !['false', '0', 'no', 'off'].includes(v);
}

// ---- the signed ticket ---------------------------------------------------------------------------

const ticketSchema = z.object({
  v: z.literal(1),
  id: z.uuid(),
  unit: z.string(),
  name: z.string(),
  bytes: z.number().int().positive(),
  sha256: z.string().regex(/^[0-9a-f]{64}$/),
  by: z.string(),
  exp: z.number().int(),
});
type Ticket = z.infer<typeof ticketSchema>;

const mac = (payload: string) => createHmac('sha256', config().AUTH_SECRET).update(`offsetry presigned upload\n${payload}`).digest();

function signTicket(t: Ticket): string {
  const payload = Buffer.from(JSON.stringify(t)).toString('base64url');
  return `${payload}.${mac(payload).toString('base64url')}`;
}

/** The ticket inside an uploadId, or why it is refused. */
function openTicket(uploadId: string): { ok: true; ticket: Ticket } | { ok: false; message: string } {
  const [payload, signature, extra] = uploadId.split('.');
  if (!payload || !signature || extra !== undefined) return { ok: false, message: 'uploadId is not one this server handed out' };
  const expected = mac(payload);
  const given = Buffer.from(signature, 'base64url');
  if (given.length !== expected.length || !timingSafeEqual(given, expected)) return { ok: false, message: 'uploadId is not one this server handed out (its signature does not match)' };
  let parsed;
  try {
    parsed = ticketSchema.safeParse(JSON.parse(Buffer.from(payload, 'base64url').toString('utf8')));
  } catch {
    return { ok: false, message: 'uploadId is not one this server handed out' };
  }
  if (!parsed.success) return { ok: false, message: 'uploadId is not one this server handed out' };
  if (parsed.data.exp * 1000 < Date.now()) return { ok: false, message: `this upload was started more than ${UPLOAD_TICKET_SECONDS / 3600} hours ago and has expired; upload the file again` };
  return { ok: true, ticket: parsed.data };
}

const stagingKey = (t: Pick<Ticket, 'unit' | 'id' | 'name'>) => `uploads/${t.unit}/${t.id}/${sanitiseFileName(t.name)}`;

// ---- requests -----------------------------------------------------------------------------------

/** Metadata may come as JSON numbers and booleans; the session form's schema reads text. */
const metaValue = z.union([z.string(), z.number(), z.boolean()]).transform(String);
const metaFields = {
  measuredOn: metaValue.optional(),
  technician: metaValue.optional(),
  instrument: metaValue.optional(),
  instrumentUncertainty: metaValue.optional(),
  ambientC: metaValue.optional(),
  target: metaValue.optional(),
  notes: metaValue.optional(),
  allowOutsideLimits: metaValue.optional(),
};

export const startUploadSchema = z.strictObject({
  unit: z.string({ error: 'unit is required: the serial number of the measured unit' }),
  fileName: z.string({ error: 'fileName is required: the name of the session file' }),
  bytes: z.number({ error: 'bytes is required: the size of the file in bytes' }).int('bytes must be a whole number').positive('bytes must be more than 0'),
  sha256: z
    .string({ error: 'sha256 is required: the SHA-256 of the file, 64 hexadecimal digits' })
    .trim()
    .regex(/^[0-9a-fA-F]{64}$/, 'sha256 must be 64 hexadecimal digits')
    .transform((s) => s.toLowerCase()),
  ...metaFields,
});

export const completeUploadSchema = z.strictObject({
  uploadId: z.string({ error: 'uploadId is required: the id answered when the upload was started' }).max(2000, 'uploadId is too long'),
  complete: z.literal(true, { error: 'complete must be true' }),
  unit: metaValue.optional(),
  ...metaFields,
});

/** Which step a body asks for: completion when it says complete: true. */
export const isCompletion = (body: unknown) => typeof body === 'object' && body !== null && 'complete' in body;

export interface StartedUpload {
  uploadId: string;
  url: string;
  key: string;
  method: 'PUT';
  headers: Record<string, string>;
  expiresAt: string;
}

type StartResult = { ok: true; status: 201; body: StartedUpload } | { ok: false; status: 400 | 409 | 413 | 501 | 503; body: UploadRefusal & { presigned?: false } };

/** Text fields for the session form's schema (undefined left out, so defaults apply). */
const textFields = (input: Record<string, string | undefined>) => Object.fromEntries(Object.entries(input).filter((e): e is [string, string] => e[1] !== undefined));

/**
 * Step 1: check what can be checked before any byte moves (metadata, unit, name, size, a duplicate file),
 * then hand out the presigned PUT URL and the signed uploadId.
 */
export async function startPresignedUpload(input: z.output<typeof startUploadSchema>, user: Uploader, database: Db = sharedDb()): Promise<StartResult> {
  if (!presignedUploadsEnabled()) {
    return refusal(501, 'Presigned uploads are turned off on this server; send the file to POST /api/sessions instead.', [], { presigned: false });
  }
  const maxBytes = config().MAX_UPLOAD_BYTES;
  const { unit, fileName, bytes, sha256, ...meta } = input;
  const problems: UploadProblem[] = [];
  // The date may follow with the completion; everything given now is checked now.
  const metaCheck = sessionMetaSchema.partial({ measuredOn: true }).safeParse(textFields({ unit, ...meta }));
  if (!metaCheck.success) problems.push(...metaProblems(metaCheck.error.issues));
  const nameProblem = fileNameProblem(fileName);
  if (nameProblem) problems.push({ field: 'fileName', message: nameProblem, expected: 'a plain file name such as session-2024-05-01.csv' });
  if (bytes > maxBytes) {
    return refusal(413, `${fileName}: the file is ${formatBytes(bytes)}; the largest session file accepted is ${formatBytes(maxBytes)}. Nothing was stored.`, [
      { file: fileName, field: 'bytes', message: `the file is ${formatBytes(bytes)}, over the limit of ${formatBytes(maxBytes)}`, expected: `a session file of at most ${formatBytes(maxBytes)}` },
    ]);
  }
  const target = metaCheck.success ? await unitForUpload(metaCheck.data.unit, database) : undefined;
  if (metaCheck.success && !target) problems.push({ field: 'unit', message: `no unit with serial number "${metaCheck.data.unit}" is registered`, expected: FIELD_EXPECTED.unit });
  if (problems.length || !target) {
    return refusal(400, `The upload was refused: ${problems.length} problem${problems.length === 1 ? '' : 's'} with the form; nothing was stored.`, problems);
  }
  const dup = await duplicateSession(target.id, sha256, database);
  if (dup) return duplicateRefusal(target.serial, dup);

  const ticket: Ticket = { v: 1, id: randomUUID(), unit: target.serial, name: fileName, bytes, sha256, by: user.id, exp: Math.floor(Date.now() / 1000) + UPLOAD_TICKET_SECONDS };
  const key = stagingKey(ticket);
  let url: string;
  try {
    url = await presignPut(key, UPLOAD_CONTENT_TYPE, PRESIGNED_URL_SECONDS);
  } catch (e) {
    log('warn', 'presigned upload: could not sign', { key, error: String(e) });
    return refusal(503, 'The file store (S3) could not sign an upload URL; try again shortly or send the file through the app.', []);
  }
  return {
    ok: true,
    status: 201,
    body: {
      uploadId: signTicket(ticket),
      url,
      key,
      method: 'PUT',
      headers: { 'content-type': UPLOAD_CONTENT_TYPE },
      expiresAt: new Date(Date.now() + PRESIGNED_URL_SECONDS * 1000).toISOString(),
    },
  };
}

const notFound = (e: unknown) => {
  const err = e as { name?: string; $metadata?: { httpStatusCode?: number } };
  return err?.name === 'NotFound' || err?.name === 'NoSuchKey' || err?.$metadata?.httpStatusCode === 404;
};

/** The staging object, chunk by chunk (pinned to the checked version where the store supports If-Match). */
async function* objectChunks(key: string, etag: string | undefined): AsyncGenerator<Buffer> {
  const out = await s3().send(new GetObjectCommand({ Bucket: bucket(), Key: key, IfMatch: etag }));
  for await (const chunk of out.Body as Readable) yield chunk as Buffer;
}

class StoreAway extends Error {}

/**
 * Step 2: verify the staging object against the ticket, then the same checks and storage as a direct
 * upload. Returns the same answers as POST /api/sessions (201, 400 with problems, 409, 413, 503).
 */
export async function completePresignedUpload(input: z.output<typeof completeUploadSchema>, user: Uploader, database: Db = sharedDb()): Promise<CreateSessionResult | { ok: false; status: 403 | 404; body: UploadRefusal }> {
  const opened = openTicket(input.uploadId);
  if (!opened.ok) return refusal(400, `The upload cannot be completed: ${opened.message}.`, [{ field: 'uploadId', message: opened.message }]);
  const t = opened.ticket;
  if (t.by !== user.id) return { ok: false, status: 403, body: { error: 'This upload was started by another user; only they can complete it.', errors: [{ field: 'uploadId', message: 'started by another user' }] } };
  const key = stagingKey(t);
  const { uploadId: _id, complete: _c, unit, ...meta } = input;

  // The staging object is kept only when the store or the database was away (503), so the same completion
  // can be sent again; every other answer is final.
  let keep = false;
  try {
    let head;
    try {
      head = await s3().send(new HeadObjectCommand({ Bucket: bucket(), Key: key }));
    } catch (e) {
      if (notFound(e)) {
        return refusal(400, `${t.name}: no file has arrived at the upload URL (or this upload was completed already); nothing was stored.`, [
          { file: t.name, field: 'file', message: 'no file was uploaded to the presigned URL', expected: `a PUT of the file to the URL answered when the upload was started, with content-type ${UPLOAD_CONTENT_TYPE}` },
        ]);
      }
      throw new StoreAway(String(e));
    }
    const size = head.ContentLength ?? -1;
    const maxBytes = config().MAX_UPLOAD_BYTES;
    if (size > maxBytes) {
      return refusal(413, `${t.name}: the uploaded file is ${formatBytes(size)}; the largest session file accepted is ${formatBytes(maxBytes)}. Nothing was stored.`, [
        { file: t.name, field: 'file', message: `the file is over the limit of ${formatBytes(maxBytes)}`, expected: `a session file of at most ${formatBytes(maxBytes)}` },
      ]);
    }
    if (size !== t.bytes) {
      return refusal(400, `${t.name}: the uploaded file is ${size} bytes, but the upload was started for ${t.bytes} bytes; nothing was stored. Upload the file again.`, [
        { file: t.name, field: 'bytes', message: `the uploaded file has ${size} bytes, not the ${t.bytes} declared`, expected: `exactly ${t.bytes} bytes` },
      ]);
    }
    // First pass: the bytes must be the ones declared before anything is parsed or stored.
    const hash = createHash('sha256');
    try {
      for await (const chunk of objectChunks(key, head.ETag)) hash.update(chunk);
    } catch (e) {
      throw new StoreAway(String(e));
    }
    const actual = hash.digest('hex');
    if (actual !== t.sha256) {
      return refusal(400, `${t.name}: the uploaded file's SHA-256 does not match the one declared when the upload started; the file was changed or damaged on the way. Nothing was stored.`, [
        { file: t.name, field: 'sha256', message: `the uploaded file's SHA-256 is ${actual}, not ${t.sha256}`, expected: 'the SHA-256 of the file that was uploaded' },
      ]);
    }

    const fields = new Map(Object.entries(textFields({ ...meta, unit: t.unit })));
    const formProblems: UploadProblem[] = [];
    if (unit !== undefined && unit.trim().toLowerCase() !== t.unit.toLowerCase()) {
      formProblems.push({ field: 'unit', message: `the upload was started for unit ${t.unit}, not "${unit.slice(0, 64)}"`, expected: `${t.unit}, or leave it out` });
    }
    const result = await checkAndStore(
      {
        fields,
        formProblems,
        fileName: t.name,
        reread: () => objectChunks(key, head.ETag),
        sha256: () => actual,
        bytes: size,
        body: () => {
          throw new Error('a presigned upload is stored by copying its staging object');
        },
        copyFrom: { key, etag: head.ETag },
      },
      user,
      database,
    );
    keep = result.status === 503;
    return result;
  } catch (e) {
    if (e instanceof StoreAway || (e as { $metadata?: unknown })?.$metadata !== undefined || (e as { code?: string })?.code === 'ECONNREFUSED') {
      log('warn', 'presigned upload: S3 failed', { key, error: String(e) });
      keep = true;
      return refusal(503, 'The file store (S3) is not reachable, so the upload could not be checked; nothing was stored. Complete the upload again shortly.', []);
    }
    throw e;
  } finally {
    // Copied to the session's key, or refused: either way the staging object has done its work.
    if (!keep) await deleteObject(key).catch((err) => log('error', 'presigned upload: could not delete the staging object', { key, error: String(err) }));
  }
}
