/**
 * Upload intake: POST /api/sessions read as a stream (multipart parts → SHA-256 + spool + streamed CSV
 * parse), then the checks every upload goes through (metadata, file name, unit, CSV, the same file again,
 * joint limits) before the session store writes it. The presigned upload (presigned-uploads.ts) brings its
 * bytes from S3 and joins at checkAndStore.
 */
import { createHash } from 'node:crypto';
import type { Readable } from 'node:stream';
import { parseSessionCsv } from '../engine/session-csv';
import type { ArmGeometry } from '../engine/types';
import { config } from './config';
import { db as sharedDb, type Db } from './db';
import { multipartBoundary, MultipartError, readMultipart } from './multipart';
import {
  FIELD_EXPECTED,
  fileNameProblem,
  MAX_LISTED_PROBLEMS,
  metaProblems,
  problemsOf,
  refusal,
  sessionMetaSchema,
  tooLargeRefusal,
  UPLOAD_FIELDS,
  type CreateSessionResult,
  type Uploader,
  type UploadProblem,
} from './session-form';
import { duplicateRefusal, duplicateSession, storeSession, unitForUpload, type StoreSessionInput, type UnitTarget } from './session-store';
import { formatBytes } from '../shared/display';
import { SERIAL_PATTERN } from './units';
import { capped, Spool, TooLarge } from './upload-spool';

/** Largest text field of the form (the notes are capped lower by the schema). */
const MAX_FIELD_BYTES = 64 * 1024;
/** Room for the metadata fields and multipart framing on top of the file itself. */
const FORM_OVERHEAD_BYTES = 256 * 1024;

const parseOptions = (geometry: ArmGeometry, name: string, maxBytes: number) => ({
  fileName: name,
  geometry,
  // Outside-limit readings are reported by us (with the override hint), so the parser keeps those rows.
  allowOutsideLimits: true,
  maxProblems: MAX_LISTED_PROBLEMS,
  // One byte more than ours, so our counter (which also stops the spool) fires first.
  maxBytes: maxBytes + 1,
});

/**
 * POST /api/sessions: read the multipart body as a stream and store the session, or refuse it with every
 * problem found. Never throws for bad input; throws only for unexpected failures.
 */
export async function createSession(request: Request, user: Uploader, database: Db = sharedDb()): Promise<CreateSessionResult> {
  const maxBytes = config().MAX_UPLOAD_BYTES;
  const boundary = multipartBoundary(request.headers.get('content-type'));
  if (!boundary) {
    return refusal(415, 'Send the session as multipart/form-data with the CSV in the "file" field and the metadata as text fields.', [
      { field: 'content-type', message: `content type "${request.headers.get('content-type') ?? '(none)'}" is not multipart/form-data`, expected: 'multipart/form-data; boundary=…' },
    ]);
  }
  const declared = Number(request.headers.get('content-length') ?? NaN);
  if (Number.isFinite(declared) && declared > maxBytes + FORM_OVERHEAD_BYTES) {
    return refusal(413, `The upload is ${formatBytes(declared)}; the largest session file accepted is ${formatBytes(maxBytes)}.`, [
      { field: 'file', message: `the request is ${formatBytes(declared)}, over the limit of ${formatBytes(maxBytes)}`, expected: `a session file of at most ${formatBytes(maxBytes)}` },
    ]);
  }
  if (!request.body) return refusal(400, 'The request has no body.', [{ field: 'file', message: 'no file was sent', expected: 'the session CSV in the "file" field' }]);

  const fields = new Map<string, string>();
  const formProblems: UploadProblem[] = [];
  const spool = new Spool();
  const hash = createHash('sha256');
  let fileName: string | undefined;
  let fileSeen = false;
  let unitTarget: UnitTarget | undefined;
  let unitLooked: string | undefined;
  let parse: Promise<Awaited<ReturnType<typeof parseSessionCsv>>> | undefined;
  let tooLarge = false;

  const lookUpUnit = async () => {
    const serial = (fields.get('unit') ?? '').trim();
    if (!serial || serial === unitLooked) return;
    unitLooked = serial;
    if (SERIAL_PATTERN.test(serial) && serial.length <= 64) unitTarget = await unitForUpload(serial, database);
  };

  try {
    try {
      for await (const part of readMultipart(capped(request.body as unknown as AsyncIterable<Uint8Array>, maxBytes + FORM_OVERHEAD_BYTES), boundary)) {
        if (part.name === 'file' && part.filename !== undefined) {
          if (fileSeen) {
            formProblems.push({ field: 'file', message: 'more than one file was sent', expected: 'exactly one session CSV per upload' });
            continue;
          }
          fileSeen = true;
          fileName = part.filename;
          const source = async function* () {
            for await (const chunk of part.data) {
              if (spool.size + chunk.length > maxBytes) {
                tooLarge = true;
                throw new TooLarge();
              }
              hash.update(chunk);
              await spool.write(chunk);
              yield chunk;
            }
          };
          await lookUpUnit();
          if (unitTarget && !fileNameProblem(fileName)) {
            // The unit came first (as our form sends it): parse while the bytes arrive.
            parse = parseSessionCsv(source(), parseOptions(unitTarget.geometry, fileName, maxBytes));
            // The parser reads to the end unless the file is refused; then the reader skips the rest.
            await parse.catch(() => undefined);
          } else {
            for await (const _ of source()) {
              // spooled; parsed once the metadata is complete
            }
          }
          continue;
        }
        let value = '';
        let size = 0;
        for await (const chunk of part.data) {
          size += chunk.length;
          if (size > MAX_FIELD_BYTES) break;
          value += chunk.toString('utf8');
        }
        if (size > MAX_FIELD_BYTES) {
          formProblems.push({ field: part.name.slice(0, 60), message: `field "${part.name.slice(0, 60)}" is longer than ${formatBytes(MAX_FIELD_BYTES)}` });
        } else if (!(UPLOAD_FIELDS as readonly string[]).includes(part.name) || part.name === 'file') {
          formProblems.push({
            field: part.name.slice(0, 60),
            message: part.name === 'file' ? 'the "file" field is text, not a file' : `unknown field "${part.name.slice(0, 60)}"`,
            expected: part.name === 'file' ? 'the session CSV sent as a file part (with a filename)' : `one of ${UPLOAD_FIELDS.join(', ')}`,
          });
        } else if (fields.has(part.name)) {
          formProblems.push({ field: part.name, message: `field "${part.name}" was sent twice`, expected: 'each field once' });
        } else fields.set(part.name, value);
      }
    } catch (e) {
      if (e instanceof TooLarge || tooLarge) return tooLargeRefusal(maxBytes, fileName);
      if (e instanceof MultipartError) return refusal(400, `The upload could not be read: ${e.message}.`, [{ message: e.message, expected: 'a multipart/form-data body as a browser or curl -F sends it' }]);
      throw e;
    }
    if (tooLarge) return tooLargeRefusal(maxBytes, fileName);
    await spool.finish();
    return await checkAndStore(
      { fields, formProblems, fileName, unitTarget, parse, reread: () => spool.read(), sha256: () => hash.digest('hex'), bytes: spool.size, body: () => spool.body() },
      user,
      database,
    );
  } finally {
    await spool.dispose();
  }
}

/** What an upload brought, however it arrived: a multipart body, or an object put through a presigned URL. */
export interface ReceivedUpload {
  /** The metadata fields as sent (text). */
  fields: Map<string, string>;
  /** Problems with the form found while reading it. */
  formProblems: UploadProblem[];
  /** The file's name; undefined when no file was sent. */
  fileName: string | undefined;
  /** The unit looked up while the body arrived (its field came before the file). */
  unitTarget?: UnitTarget;
  /** The parse started while the bytes arrived, if any. */
  parse?: ReturnType<typeof parseSessionCsv>;
  /** The bytes again, for a parse that had to wait for the metadata. */
  reread: () => AsyncIterable<Buffer>;
  sha256: () => string;
  bytes: number;
  /** The bytes for the object store (StoreSessionInput.body). */
  body: () => Buffer | Readable;
  /** Store by a server-side copy of this object instead of writing `body` (StoreSessionInput.copyFrom). */
  copyFrom?: StoreSessionInput['copyFrom'];
}

/**
 * The checks every upload goes through once its bytes are in (metadata, file name, unit, CSV, duplicate,
 * joint limits), then storeSession. Shared by the multipart upload and the presigned upload.
 */
export async function checkAndStore(received: ReceivedUpload, user: Uploader, database: Db = sharedDb()): Promise<CreateSessionResult> {
  const maxBytes = config().MAX_UPLOAD_BYTES;
  const { fields, formProblems, fileName } = received;
  const fileSeen = fileName !== undefined;

  // ---- metadata ----
  const meta = sessionMetaSchema.safeParse(Object.fromEntries([...fields].filter(([k]) => k !== 'file')));
  if (!meta.success) formProblems.push(...metaProblems(meta.error.issues));
  if (!fileSeen) formProblems.push({ field: 'file', message: 'no session file was sent', expected: 'the session CSV in the "file" field' });
  else {
    const bad = fileNameProblem(fileName!);
    if (bad) formProblems.push({ field: 'file', message: bad, expected: 'a plain file name such as session-2024-05-01.csv' });
  }
  let unitTarget: UnitTarget | undefined;
  if (meta.success) {
    // The unit found while the body arrived, or looked up now (its field came after the file).
    unitTarget = received.unitTarget?.serial === meta.data.unit ? received.unitTarget : await unitForUpload(meta.data.unit, database);
    if (!unitTarget) formProblems.push({ field: 'unit', message: `no unit with serial number "${meta.data.unit}" is registered`, expected: FIELD_EXPECTED.unit });
  }
  if (formProblems.length || !meta.success || !unitTarget) {
    return refusal(400, `The upload was refused: ${formProblems.length} problem${formProblems.length === 1 ? '' : 's'} with the form; nothing was stored.`, formProblems);
  }

  // ---- the file ----
  const parse = received.parse ?? parseSessionCsv(received.reread(), parseOptions(unitTarget.geometry, fileName!, maxBytes));
  let parsed: Awaited<typeof parse>;
  try {
    parsed = await parse;
  } catch (e) {
    if (e instanceof TooLarge) return tooLargeRefusal(maxBytes, fileName);
    throw e;
  }
  if (!parsed.ok) {
    const n = parsed.problems.length;
    return refusal(
      400,
      `${fileName}: the session file was refused with ${n}${parsed.truncated ? '+' : ''} problem${n === 1 ? '' : 's'}${parsed.truncated ? ` (only the first ${n} are listed; fix these and upload again to see the rest)` : ''}; nothing was stored.`,
      problemsOf(parsed.problems),
      { truncated: parsed.truncated },
    );
  }
  const sha256 = received.sha256();

  // ---- the same file again? ----
  const dup = await duplicateSession(unitTarget.id, sha256, database);
  if (dup) return duplicateRefusal(unitTarget.serial, dup);

  // ---- joint limits ----
  if (parsed.outsideLimits.length && !meta.data.allowOutsideLimits) {
    const listed = parsed.outsideLimits.slice(0, MAX_LISTED_PROBLEMS);
    return refusal(
      400,
      `${fileName}: ${parsed.outsideLimits.length} joint reading${parsed.outsideLimits.length === 1 ? ' is' : 's are'} outside the model's limits. Check the readings; if they are right, upload again with the outside-limits override (allowOutsideLimits=true). Nothing was stored.`,
      problemsOf(listed),
      { outsideLimits: true, truncated: parsed.outsideLimits.length > listed.length },
    );
  }

  const stored = await storeSession(
    {
      unit: unitTarget,
      meta: { ...meta.data, technician: meta.data.technician || user.name },
      fileName: fileName!,
      body: received.body,
      copyFrom: received.copyFrom,
      bytes: received.bytes,
      sha256,
      parsed,
      outsideLimitsOverride: meta.data.allowOutsideLimits && parsed.outsideLimits.length > 0,
      actorId: user.id,
    },
    database,
  );
  if (!stored.ok) return stored;
  return { ok: true, status: 201, body: stored.body };
}
