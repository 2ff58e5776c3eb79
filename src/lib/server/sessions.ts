/**
 * Measurement sessions: the upload pipeline (streamed multipart → SHA-256 + spool + streamed CSV parse →
 * checks → S3 object → one transaction of rows), and the reads behind the session pages and API.
 *
 * Storage order, so nothing is ever half-stored: the object is written first under a key that contains the
 * new session id; then the session row, every pose and the audit entry go in one transaction. If the
 * transaction fails the object is deleted again; if S3 fails no row is written.
 */
import { sessionVerdicts, type Verdicts } from '../engine/plausibility';
import { unitJudgement } from './judgement';
import { CopyObjectCommand, PutObjectCommand } from '@aws-sdk/client-s3';
import { cleanText, isCalendarDate } from '../shared/input';
import { and, asc, count, desc, eq, sql } from 'drizzle-orm';
import { createHash, randomUUID } from 'node:crypto';
import { createReadStream, createWriteStream, type WriteStream } from 'node:fs';
import { mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { Readable } from 'node:stream';
import { z } from 'zod';
import { armModelRevisions, armModels, sessionPoses as poseRows, sessions, units, users } from '../../db/schema';
import { poseSetQuality, type PoseSetQuality } from '../engine/planner';
import { runEngineTask } from './engine-runner';
import { parseSessionCsv, type ParsedSession } from '../engine/session-csv';
import { EngineInputError, type ArmGeometry, type FrameSpec, type InputProblem } from '../engine/types';
import { audit } from './audit';
import { arrayParam, BULK_ROWS, pgArray } from './bulk';
import { config } from './config';
import { db as sharedDb, type Db } from './db';
import { pageTotal, windowTotal } from './paging';
import { isServiceUnavailable } from './http';
import { log } from './log';
import { multipartBoundary, MultipartError, readMultipart } from './multipart';
import { bucket, deleteObject, getObjectStream, s3 } from './s3';
import { SERIAL_PATTERN } from './units';

// ---- limits ---------------------------------------------------------------------------------------

/** Upload bytes kept in memory before the spool moves to a temporary file. */
const SPOOL_MEMORY_BYTES = 4 * 1024 * 1024;
/** Largest text field of the form (the notes are capped lower by the schema). */
const MAX_FIELD_BYTES = 64 * 1024;
/** Room for the metadata fields and multipart framing on top of the file itself. */
const FORM_OVERHEAD_BYTES = 256 * 1024;
/** Problems listed in a 400 answer. */
export const MAX_LISTED_PROBLEMS = 100;
/** Rows per multi-row INSERT: 1 000 rows × 10 columns stays far below PostgreSQL's 65 535 parameters. */

export const UPLOAD_FIELDS = ['unit', 'measuredOn', 'technician', 'instrument', 'instrumentUncertainty', 'ambientC', 'target', 'notes', 'allowOutsideLimits', 'file'] as const;

// ---- metadata -------------------------------------------------------------------------------------

// Control characters other than tab and line ends have no place in metadata.
const CONTROL = /[\u0000-\u0008\u000b\u000c\u000e-\u001f\u007f]/;
const text = (field: string, max: number) =>
  z
    .string()
    .trim()
    .max(max, `${field} is at most ${max} characters`)
    .refine((s) => !CONTROL.test(s), `${field} contains control characters`)
    // Bidi overrides, isolates and zero-width characters would reorder or hide text on screen: removed.
    .overwrite((s) => cleanText(s, true));

const today = () => new Date().toISOString().slice(0, 10);

export const sessionMetaSchema = z.strictObject({
  unit: z
    .string({ error: 'unit is required: the serial number of the measured unit' })
    .trim()
    .min(1, 'unit is required: the serial number of the measured unit')
    .max(64, 'unit (serial number) is at most 64 characters')
    .regex(SERIAL_PATTERN, 'unit must be a serial number: letters, digits, ".", "_" and "-", starting with a letter or digit'),
  measuredOn: z
    .string({ error: 'measuredOn is required (YYYY-MM-DD)' })
    .trim()
    .regex(/^\d{4}-\d{2}-\d{2}$/, 'measuredOn must be a date written YYYY-MM-DD')
    .refine((s) => isCalendarDate(s, '0001-01-01', '9999-12-31'), 'measuredOn is not a calendar date')
    .refine((s) => s >= '1990-01-01', 'measuredOn is before 1990')
    // One day of slack: the technician's time zone may be ahead of the server's.
    .refine((s) => s <= new Date(Date.now() + 86_400_000).toISOString().slice(0, 10), 'measuredOn is in the future'),
  technician: text('technician', 120).default(''),
  instrument: text('instrument', 120).default(''),
  instrumentUncertainty: text('instrumentUncertainty', 120).default(''),
  ambientC: z
    .string()
    .trim()
    .max(32, 'ambientC is too long')
    .default('')
    .transform((s, ctx) => {
      if (s === '') return null;
      if (!/^[+-]?(?:\d+\.?\d*|\.\d+)$/.test(s)) {
        ctx.addIssue({ code: 'custom', message: /^[+-]?\d+,\d+$/.test(s) ? `ambientC "${s}" uses a decimal comma; write it with a point (e.g. 21.5)` : `ambientC "${s}" is not a number` });
        return z.NEVER;
      }
      const v = Number(s);
      if (v < -20 || v > 60) {
        ctx.addIssue({ code: 'custom', message: `ambientC ${v} °C is outside −20 to 60 °C` });
        return z.NEVER;
      }
      return v;
    }),
  target: text('target', 200).default(''),
  notes: text('notes', 4000).default(''),
  allowOutsideLimits: z
    .enum(['true', 'false', 'on', 'off', '1', '0', ''], { error: 'allowOutsideLimits must be true or false' })
    .default('false')
    .transform((v) => v === 'true' || v === 'on' || v === '1'),
});
export type SessionMeta = z.output<typeof sessionMetaSchema>;

/** Expected form of each field, for the problem list. */
export const FIELD_EXPECTED: Record<string, string> = {
  unit: 'the serial number of a registered unit',
  measuredOn: 'a date YYYY-MM-DD, not in the future',
  ambientC: 'a temperature in °C from −20 to 60, decimal point',
  allowOutsideLimits: 'true or false',
  technician: 'at most 120 characters',
  instrument: 'at most 120 characters',
  instrumentUncertainty: "the instrument's stated uncertainty as its certificate gives it, at most 120 characters",
  target: 'at most 200 characters',
  notes: 'at most 4000 characters',
};

/** Refuse names that look like paths; the stored key uses a sanitised copy. */
export function fileNameProblem(name: string): string | undefined {
  if (name.trim() === '') return 'the file has no name';
  if (name.length > 200) return 'the file name is longer than 200 characters';
  if (/[/\\]/.test(name) || name.includes('..') || CONTROL.test(name) || name.includes('\0')) {
    return `the file name "${name.slice(0, 80)}" looks like a path`;
  }
  return undefined;
}

export function sanitiseFileName(name: string): string {
  const s = name
    .normalize('NFKD')
    .replace(/[^A-Za-z0-9._-]+/g, '_')
    .replace(/_+/g, '_')
    .replace(/^[._]+/, '')
    .slice(0, 120);
  return s || 'session.csv';
}

export const sessionUrl = (id: string) => `/sessions/${id}`;

// ---- problems and results -------------------------------------------------------------------------

export interface UploadProblem {
  file?: string;
  line?: number;
  column?: string;
  field?: string;
  message: string;
  expected?: string;
}

export interface UploadRefusal {
  error: string;
  errors: UploadProblem[];
  /** True when more problems exist than are listed. */
  truncated?: boolean;
  /** Set when the only obstacle is joint readings outside the model's limits (send allowOutsideLimits=true). */
  outsideLimits?: boolean;
  existing?: { id: string; url: string };
}

export interface UploadAccepted {
  id: string;
  url: string;
  poseCount: number;
  warnings: InputProblem[];
}

export type CreateSessionResult = { ok: true; status: 201; body: UploadAccepted } | { ok: false; status: 400 | 409 | 413 | 415 | 503; body: UploadRefusal };

const refuse = (status: 400 | 409 | 413 | 415 | 503, error: string, errors: UploadProblem[] = [], extra: Partial<UploadRefusal> = {}): CreateSessionResult => ({
  ok: false,
  status,
  body: { error, errors, ...extra },
});

// ---- spool: the raw bytes, in memory while small, in a temporary file above a few MB -----------------

class Spool {
  private chunks: Buffer[] = [];
  private dir?: string;
  private path?: string;
  private stream?: WriteStream;
  size = 0;

  async write(chunk: Buffer) {
    this.size += chunk.length;
    if (!this.stream && this.size <= SPOOL_MEMORY_BYTES) {
      // Copy: the multipart reader's buffers are views into its working memory.
      this.chunks.push(Buffer.from(chunk));
      return;
    }
    if (!this.stream) {
      this.dir = await mkdtemp(join(tmpdir(), 'offsetry-upload-'));
      this.path = join(this.dir, 'file');
      this.stream = createWriteStream(this.path);
      for (const c of this.chunks) await this.put(c);
      this.chunks = [];
    }
    await this.put(chunk);
  }

  private put(chunk: Buffer): Promise<void> {
    const stream = this.stream!;
    return new Promise((resolve, reject) => {
      const ok = stream.write(chunk, (err) => (err ? reject(err) : ok && resolve()));
      if (!ok) stream.once('drain', resolve);
    });
  }

  async finish() {
    const stream = this.stream;
    if (stream) await new Promise<void>((resolve, reject) => stream.end((err?: Error | null) => (err ? reject(err) : resolve())));
  }

  /** The bytes again, chunk by chunk (for a parse that had to wait for the unit field). */
  async *read(): AsyncGenerator<Buffer> {
    if (this.path) yield* createReadStream(this.path, { highWaterMark: 1 << 16 }) as AsyncIterable<Buffer>;
    else yield* this.chunks;
  }

  body(): Buffer | Readable {
    return this.path ? createReadStream(this.path) : Buffer.concat(this.chunks);
  }

  async dispose() {
    this.stream?.destroy();
    if (this.dir) await rm(this.dir, { recursive: true, force: true });
  }
}

class TooLarge extends Error {}

/** The request body, refused once it passes `limit` bytes (also when no content-length was sent). */
async function* capped(body: AsyncIterable<Uint8Array>, limit: number): AsyncGenerator<Uint8Array> {
  let total = 0;
  for await (const chunk of body) {
    total += chunk.byteLength;
    if (total > limit) throw new TooLarge();
    yield chunk;
  }
}

export interface UnitTarget {
  id: string;
  serial: string;
  modelRevisionId: string;
  geometry: ArmGeometry;
}

export async function unitForUpload(serial: string, database: Db): Promise<UnitTarget | undefined> {
  const [row] = await database
    .select({ id: units.id, serial: units.serial, modelRevisionId: units.modelRevisionId, geometry: armModelRevisions.geometry })
    .from(units)
    .innerJoin(armModelRevisions, eq(armModelRevisions.id, units.modelRevisionId))
    .where(eq(units.serial, serial));
  return row;
}

const problemsOf = (ps: InputProblem[]): UploadProblem[] =>
  ps.map((p) => ({ file: p.file, line: p.line, column: p.column, message: p.message, expected: p.expected }));

const parseOptions = (geometry: ArmGeometry, name: string, maxBytes: number) => ({
  fileName: name,
  geometry,
  // Outside-limit readings are reported by us (with the override hint), so the parser keeps those rows.
  allowOutsideLimits: true,
  maxProblems: MAX_LISTED_PROBLEMS,
  // One byte more than ours, so our counter (which also stops the spool) fires first.
  maxBytes: maxBytes + 1,
});

// ---- the upload --------------------------------------------------------------------------------------

export interface Uploader {
  id: string;
  name: string;
}

/**
 * POST /api/sessions: read the multipart body as a stream and store the session, or refuse it with every
 * problem found. Never throws for bad input; throws only for unexpected failures.
 */
export async function createSession(request: Request, user: Uploader, database: Db = sharedDb()): Promise<CreateSessionResult> {
  const maxBytes = config().MAX_UPLOAD_BYTES;
  const boundary = multipartBoundary(request.headers.get('content-type'));
  if (!boundary) {
    return refuse(415, 'Send the session as multipart/form-data with the CSV in the "file" field and the metadata as text fields.', [
      { field: 'content-type', message: `content type "${request.headers.get('content-type') ?? '(none)'}" is not multipart/form-data`, expected: 'multipart/form-data; boundary=…' },
    ]);
  }
  const declared = Number(request.headers.get('content-length') ?? NaN);
  if (Number.isFinite(declared) && declared > maxBytes + FORM_OVERHEAD_BYTES) {
    return refuse(413, `The upload is ${formatBytes(declared)}; the largest session file accepted is ${formatBytes(maxBytes)}.`, [
      { field: 'file', message: `the request is ${formatBytes(declared)}, over the limit of ${formatBytes(maxBytes)}`, expected: `a session file of at most ${formatBytes(maxBytes)}` },
    ]);
  }
  if (!request.body) return refuse(400, 'The request has no body.', [{ field: 'file', message: 'no file was sent', expected: 'the session CSV in the "file" field' }]);

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
      if (e instanceof TooLarge || tooLarge) {
        return refuse(413, `The session file is larger than the limit of ${formatBytes(maxBytes)}; nothing was stored.`, [
          { file: fileName, field: 'file', message: `the file is over the limit of ${formatBytes(maxBytes)} (reading stopped there)`, expected: `a session file of at most ${formatBytes(maxBytes)}` },
        ]);
      }
      if (e instanceof MultipartError) return refuse(400, `The upload could not be read: ${e.message}.`, [{ message: e.message, expected: 'a multipart/form-data body as a browser or curl -F sends it' }]);
      throw e;
    }
    if (tooLarge) {
      return refuse(413, `The session file is larger than the limit of ${formatBytes(maxBytes)}; nothing was stored.`, [
        { file: fileName, field: 'file', message: `the file is over the limit of ${formatBytes(maxBytes)} (reading stopped there)`, expected: `a session file of at most ${formatBytes(maxBytes)}` },
      ]);
    }
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
  if (!meta.success) {
    for (const issue of meta.error.issues) {
      const field = issue.path.map(String).join('.') || undefined;
      formProblems.push({ field, message: issue.message, expected: field ? FIELD_EXPECTED[field] : undefined });
    }
  }
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
    return refuse(400, `The upload was refused: ${formProblems.length} problem${formProblems.length === 1 ? '' : 's'} with the form; nothing was stored.`, formProblems);
  }

  // ---- the file ----
  const parse = received.parse ?? parseSessionCsv(received.reread(), parseOptions(unitTarget.geometry, fileName!, maxBytes));
  let parsed: Awaited<typeof parse>;
  try {
    parsed = await parse;
  } catch (e) {
    if (e instanceof TooLarge) return refuse(413, `The session file is larger than the limit of ${formatBytes(maxBytes)}; nothing was stored.`);
    throw e;
  }
  if (!parsed.ok) {
    const n = parsed.problems.length;
    return refuse(
      400,
      `${fileName}: the session file was refused with ${n}${parsed.truncated ? '+' : ''} problem${n === 1 ? '' : 's'}${parsed.truncated ? ` (only the first ${n} are listed; fix these and upload again to see the rest)` : ''}; nothing was stored.`,
      problemsOf(parsed.problems),
      { truncated: parsed.truncated },
    );
  }
  const sha256 = received.sha256();

  // ---- the same file again? ----
  const [dup] = await database
    .select({ id: sessions.id, measuredOn: sessions.measuredOn })
    .from(sessions)
    .where(and(eq(sessions.unitId, unitTarget.id), eq(sessions.fileSha256, sha256)));
  if (dup) {
    return refuse(409, `This file was already uploaded for unit ${unitTarget.serial} (the session measured on ${dup.measuredOn}); nothing new was stored.`, [], {
      existing: { id: dup.id, url: sessionUrl(dup.id) },
    });
  }

  // ---- joint limits ----
  if (parsed.outsideLimits.length && !meta.data.allowOutsideLimits) {
    const listed = parsed.outsideLimits.slice(0, MAX_LISTED_PROBLEMS);
    return refuse(
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

export interface StoreSessionInput {
  unit: { id: string; serial: string; modelRevisionId: string };
  meta: Omit<SessionMeta, 'unit' | 'allowOutsideLimits'>;
  fileName: string;
  /** The raw bytes (called once, when the object is written). */
  body: () => Buffer | Readable;
  /**
   * An object already in the bucket holding exactly these bytes (a presigned upload's staging object): it
   * is copied inside the store instead of sending `body`. `etag` pins the copy to the version that was checked.
   */
  copyFrom?: { key: string; etag?: string };
  bytes: number;
  sha256: string;
  parsed: ParsedSession;
  outsideLimitsOverride: boolean;
  actorId: string | null;
}

type Tx = Parameters<Parameters<Db['transaction']>[0]>[0];

/**
 * A session's poses in one `unnest` statement per BULK_ROWS rows (one array parameter per column instead of
 * one parameter per cell): 100 000 rows in four round trips, inside the caller's transaction.
 */
async function insertSessionPoses(tx: Tx, sessionId: string, poses: ParsedSession['poses'], outside: Set<number | undefined>): Promise<void> {
  for (let k = 0; k < poses.length; k += BULK_ROWS) {
    const part = poses.slice(k, k + BULK_ROWS);
    await tx.execute(sql`
      insert into session_poses (session_id, idx, line, label, q, x, y, z, split, outside_limits)
      select ${sessionId}::uuid, u.idx, u.line, u.label, u.q::float8[], u.x, u.y, u.z, u.split, u.outside
      from unnest(
        ${arrayParam(pgArray.int(part.map((_, j) => k + j)), 'int[]')},
        ${arrayParam(pgArray.int(part.map((p) => p.line)), 'int[]')},
        ${arrayParam(pgArray.text(part.map((p) => p.label)), 'text[]')},
        ${arrayParam(pgArray.floatRows(part.map((p) => p.q)), 'text[]')},
        ${arrayParam(pgArray.float(part.map((p) => p.x)), 'float8[]')},
        ${arrayParam(pgArray.float(part.map((p) => p.y)), 'float8[]')},
        ${arrayParam(pgArray.float(part.map((p) => p.z)), 'float8[]')},
        ${arrayParam(pgArray.text(part.map((p) => p.split ?? null)), 'text[]')},
        ${arrayParam(pgArray.bool(part.map((p) => outside.has(p.line))), 'bool[]')}
      ) as u(idx, line, label, q, x, y, z, split, outside)`);
  }
}

/**
 * Store a checked session: the object first, then the rows in one transaction. Used by the upload and by
 * the demo scenario, so both go through the same path.
 */
export async function storeSession(input: StoreSessionInput, database: Db = sharedDb()): Promise<{ ok: true; body: UploadAccepted } | { ok: false; status: 409 | 503; body: UploadRefusal }> {
  const id = randomUUID();
  const key = `sessions/${input.unit.serial}/${id}/${sanitiseFileName(input.fileName)}`;
  const outside = new Set(input.parsed.outsideLimits.map((p) => p.line));
  const warnings: InputProblem[] = [
    ...input.parsed.warnings,
    ...(input.outsideLimitsOverride ? input.parsed.outsideLimits.map((p) => ({ ...p, message: `${p.message} (accepted with the outside-limits override)` })) : []),
  ].slice(0, 500);

  try {
    if (input.copyFrom) {
      await s3().send(
        new CopyObjectCommand({
          Bucket: bucket(),
          Key: key,
          CopySource: `${bucket()}/${input.copyFrom.key.split('/').map(encodeURIComponent).join('/')}`,
          CopySourceIfMatch: input.copyFrom.etag,
          MetadataDirective: 'REPLACE',
          ContentType: 'text/csv',
          Metadata: { sha256: input.sha256, 'session-id': id },
        }),
      );
    } else {
      await s3().send(
        new PutObjectCommand({
          Bucket: bucket(),
          Key: key,
          Body: input.body(),
          ContentLength: input.bytes,
          ContentType: 'text/csv',
          Metadata: { sha256: input.sha256, 'session-id': id },
        }),
      );
    }
  } catch (e) {
    log('warn', 'session upload: S3 put failed', { key, error: String(e) });
    return {
      ok: false,
      status: 503,
      body: { error: 'The file store (S3) is not reachable, so the session was not stored: no file and no rows were kept. Try the upload again shortly.', errors: [] },
    };
  }

  try {
    await database.transaction(async (tx) => {
      await tx.insert(sessions).values({
        id,
        unitId: input.unit.id,
        modelRevisionId: input.unit.modelRevisionId,
        measuredOn: input.meta.measuredOn,
        technician: input.meta.technician,
        instrument: input.meta.instrument,
        instrumentUncertainty: input.meta.instrumentUncertainty,
        ambientC: input.meta.ambientC,
        target: input.meta.target,
        notes: input.meta.notes,
        // Shown on pages and in lists: without control or bidi characters (the file itself is kept as uploaded).
        fileName: cleanText(input.fileName),
        fileKey: key,
        fileSha256: input.sha256,
        fileBytes: input.bytes,
        poseCount: input.parsed.poses.length,
        jointCount: input.parsed.poses[0]?.q.length ?? 0,
        hasSplit: input.parsed.hasSplit,
        repeatGroups: input.parsed.repeatGroups,
        outsideLimitsOverride: input.outsideLimitsOverride,
        warnings,
        uploadedBy: input.actorId,
      });
      const poses = input.parsed.poses;
      await insertSessionPoses(tx, id, poses, outside);
      await audit(tx, {
        actorId: input.actorId,
        unitId: input.unit.id,
        entityType: 'session',
        entityId: id,
        action: 'session.uploaded',
        details: { fileName: input.fileName, sha256: input.sha256, poseCount: poses.length, measuredOn: input.meta.measuredOn, outsideLimitsOverride: input.outsideLimitsOverride },
      });
    });
  } catch (e) {
    await deleteObject(key).catch((err) => log('error', 'session upload: could not delete the object of a failed transaction', { key, error: String(err) }));
    const code = (e as { code?: string; cause?: { code?: string } }).code ?? (e as { cause?: { code?: string } }).cause?.code;
    if (code === '23505') {
      // Two uploads of the same file raced; the other one won.
      const [dup] = await database.select({ id: sessions.id }).from(sessions).where(and(eq(sessions.unitId, input.unit.id), eq(sessions.fileSha256, input.sha256)));
      if (dup) return { ok: false, status: 409, body: { error: `This file was already uploaded for unit ${input.unit.serial}; nothing new was stored.`, errors: [], existing: { id: dup.id, url: sessionUrl(dup.id) } } };
    }
    if (isServiceUnavailable(e)) {
      return { ok: false, status: 503, body: { error: 'The database is not reachable, so the session was not stored (the file was removed again). Try the upload again shortly.', errors: [] } };
    }
    throw e;
  }
  return { ok: true, body: { id, url: sessionUrl(id), poseCount: input.parsed.poses.length, warnings } };
}

export function formatBytes(b: number): string {
  if (b >= 1024 * 1024) return `${+(b / (1024 * 1024)).toFixed(1)} MiB`;
  if (b >= 1024) return `${+(b / 1024).toFixed(1)} KiB`;
  return `${b} bytes`;
}

// ---- reads -------------------------------------------------------------------------------------------

export const sessionListQuerySchema = z.strictObject({
  unit: z.string().trim().max(64).regex(SERIAL_PATTERN, 'unit must be a serial number').optional(),
  page: z.coerce.number({ error: 'page must be a whole number' }).int('page must be a whole number').min(1, 'page starts at 1').default(1),
  pageSize: z.coerce.number({ error: 'pageSize must be a whole number' }).int('pageSize must be a whole number').min(1).max(200, 'pageSize is at most 200').default(25),
});
export type SessionListQuery = z.output<typeof sessionListQuerySchema>;

export interface SessionSummary {
  id: string;
  url: string;
  unit: string;
  measuredOn: string;
  technician: string;
  instrument: string;
  fileName: string;
  poseCount: number;
  hasSplit: boolean;
  repeatGroups: number;
  outsideLimitsOverride: boolean;
  warningCount: number;
  createdAt: string;
}

export async function listSessions(query: SessionListQuery, database: Db = sharedDb()): Promise<{ sessions: SessionSummary[]; total: number; page: number; pageSize: number }> {
  const where = query.unit ? eq(units.serial, query.unit) : undefined;
  const rows = await database
    // Only the listed columns: the list never needs the stored warnings' text or the file key.
    .select({
      s: {
        id: sessions.id,
        measuredOn: sessions.measuredOn,
        technician: sessions.technician,
        instrument: sessions.instrument,
        fileName: sessions.fileName,
        poseCount: sessions.poseCount,
        hasSplit: sessions.hasSplit,
        repeatGroups: sessions.repeatGroups,
        outsideLimitsOverride: sessions.outsideLimitsOverride,
        warningCount: sql<number>`jsonb_array_length(${sessions.warnings})`.mapWith(Number),
        createdAt: sessions.createdAt,
      },
      serial: units.serial,
      total: windowTotal(),
    })
    .from(sessions)
    .innerJoin(units, eq(units.id, sessions.unitId))
    .where(where)
    .orderBy(desc(sessions.measuredOn), desc(sessions.createdAt), asc(sessions.id))
    .limit(query.pageSize)
    .offset((query.page - 1) * query.pageSize);
  const total = await pageTotal(rows, query.page, async () => {
    const [c] = await database.select({ n: count() }).from(sessions).innerJoin(units, eq(units.id, sessions.unitId)).where(where);
    return c?.n ?? 0;
  });
  return {
    sessions: rows.map(({ s, serial }) => ({
      id: s.id,
      url: sessionUrl(s.id),
      unit: serial,
      measuredOn: s.measuredOn,
      technician: s.technician,
      instrument: s.instrument,
      fileName: s.fileName,
      poseCount: s.poseCount,
      hasSplit: s.hasSplit,
      repeatGroups: s.repeatGroups,
      outsideLimitsOverride: s.outsideLimitsOverride,
      warningCount: s.warningCount,
      createdAt: s.createdAt.toISOString(),
    })),
    total,
    page: query.page,
    pageSize: query.pageSize,
  };
}

export interface SessionView {
  id: string;
  url: string;
  fileUrl: string;
  unit: { id: string; serial: string; site: string; cell: string; url: string };
  model: { id: string; name: string; revision: number; revisionId: string };
  measuredOn: string;
  technician: string;
  instrument: string;
  instrumentUncertainty: string;
  ambientC: number | null;
  target: string;
  notes: string;
  fileName: string;
  fileSha256: string;
  fileBytes: number;
  poseCount: number;
  jointCount: number;
  hasSplit: boolean;
  repeatGroups: number;
  outsideLimitsOverride: boolean;
  warnings: InputProblem[];
  uploadedBy: { name: string; email: string } | null;
  createdAt: string;
}

async function sessionRow(id: string, database: Db) {
  const [row] = await database
    .select({ s: sessions, u: units, r: armModelRevisions, m: armModels, by: { name: users.name, email: users.email } })
    .from(sessions)
    .innerJoin(units, eq(units.id, sessions.unitId))
    .innerJoin(armModelRevisions, eq(armModelRevisions.id, sessions.modelRevisionId))
    .innerJoin(armModels, eq(armModels.id, armModelRevisions.modelId))
    .leftJoin(users, eq(users.id, sessions.uploadedBy))
    .where(eq(sessions.id, id));
  return row;
}

export async function getSession(id: string, database: Db = sharedDb()): Promise<SessionView | undefined> {
  const row = await sessionRow(id, database);
  if (!row) return undefined;
  const { s, u, r, m, by } = row;
  return {
    id: s.id,
    url: sessionUrl(s.id),
    fileUrl: `/api/sessions/${s.id}/file`,
    unit: { id: u.id, serial: u.serial, site: u.site, cell: u.cell, url: `/units/${encodeURIComponent(u.serial)}` },
    model: { id: m.id, name: m.name, revision: r.revision, revisionId: r.id },
    measuredOn: s.measuredOn,
    technician: s.technician,
    instrument: s.instrument,
    instrumentUncertainty: s.instrumentUncertainty,
    ambientC: s.ambientC,
    target: s.target,
    notes: s.notes,
    fileName: s.fileName,
    fileSha256: s.fileSha256,
    fileBytes: s.fileBytes,
    poseCount: s.poseCount,
    jointCount: s.jointCount,
    hasSplit: s.hasSplit,
    repeatGroups: s.repeatGroups,
    outsideLimitsOverride: s.outsideLimitsOverride,
    warnings: s.warnings,
    uploadedBy: by?.name ? { name: by.name, email: by.email! } : null,
    createdAt: s.createdAt.toISOString(),
  };
}

/** The original bytes, streamed from S3, with what the download headers need. */
export async function sessionFileStream(id: string, database: Db = sharedDb()): Promise<{ body: Readable; fileName: string; bytes: number; sha256: string } | undefined> {
  const [s] = await database.select({ key: sessions.fileKey, fileName: sessions.fileName, bytes: sessions.fileBytes, sha256: sessions.fileSha256 }).from(sessions).where(eq(sessions.id, id));
  if (!s) return undefined;
  const obj = await getObjectStream(s.key);
  return { body: obj.body, fileName: s.fileName, bytes: s.bytes, sha256: s.sha256 };
}

export const posePageSchema = z.strictObject({
  page: z.coerce.number({ error: 'page must be a whole number' }).int('page must be a whole number').min(1, 'page starts at 1').default(1),
  pageSize: z.coerce.number({ error: 'pageSize must be a whole number' }).int('pageSize must be a whole number').min(1).max(1000, 'pageSize is at most 1000').default(50),
});

export interface PoseRow {
  idx: number;
  line: number;
  label: string;
  q: number[];
  x: number;
  y: number;
  z: number;
  split: 'fit' | 'validate' | null;
  outsideLimits: boolean;
}

export async function sessionPoses(id: string, page: { page: number; pageSize: number }, database: Db = sharedDb()): Promise<{ poses: PoseRow[]; total: number; page: number; pageSize: number } | undefined> {
  const [s] = await database.select({ n: sessions.poseCount }).from(sessions).where(eq(sessions.id, id));
  if (!s) return undefined;
  const rows = await database
    .select({ idx: poseRows.idx, line: poseRows.line, label: poseRows.label, q: poseRows.q, x: poseRows.x, y: poseRows.y, z: poseRows.z, split: poseRows.split, outsideLimits: poseRows.outsideLimits })
    .from(poseRows)
    .where(and(eq(poseRows.sessionId, id), sql`${poseRows.idx} >= ${(page.page - 1) * page.pageSize}`))
    .orderBy(asc(poseRows.idx))
    .limit(page.pageSize);
  return { poses: rows, total: s.n, page: page.page, pageSize: page.pageSize };
}

/** Every pose of a session in file order, as the engine takes them. */
export async function allSessionPoses(id: string, database: Db = sharedDb()) {
  const rows = await database
    .select({ line: poseRows.line, label: poseRows.label, q: poseRows.q, x: poseRows.x, y: poseRows.y, z: poseRows.z, split: poseRows.split })
    .from(poseRows)
    .where(eq(poseRows.sessionId, id))
    .orderBy(asc(poseRows.idx));
  return rows.map((r) => ({ label: r.label, line: r.line, q: r.q, x: r.x, y: r.y, z: r.z, ...(r.split ? { split: r.split } : {}) }));
}

async function sessionGeometry(id: string, database: Db): Promise<ArmGeometry | undefined> {
  const [row] = await database
    .select({ geometry: armModelRevisions.geometry })
    .from(sessions)
    .innerJoin(armModelRevisions, eq(armModelRevisions.id, sessions.modelRevisionId))
    .where(eq(sessions.id, id));
  return row?.geometry;
}

export interface SessionCheck {
  /** Nominal-model error per pose (mm), after registering the tracker frame to the base when needed. */
  stats: { n: number; rms: number; mean: number; max: number; p95: number };
  registered: boolean;
  poses: { label: string; line: number; error: number }[];
  problem?: string;
  /** The plausibility rules that need no fit (src/lib/engine/plausibility.ts), the same the fit applies. */
  verdicts?: Verdicts;
}

/** The nominal model of the unit's revision against the measured points (engine checkGeometry). */
export async function sessionCheck(id: string, database: Db = sharedDb()): Promise<SessionCheck | undefined> {
  return (await sessionCheckDetail(id, database))?.check;
}

/**
 * The check with what the session page's 3-D view also needs: the nominal geometry, the base frame the check
 * used (registered when the geometry has none) and each pose's error vector (measured − predicted, mm).
 */
export async function sessionCheckDetail(id: string, database: Db = sharedDb()): Promise<
  | { check: SessionCheck; geometry: ArmGeometry; base: FrameSpec | undefined; residuals: { line: number; residual: [number, number, number] }[] }
  | undefined
> {
  const geometry = await sessionGeometry(id, database);
  if (!geometry) return undefined;
  const poses = await allSessionPoses(id, database);
  try {
    // Registration and residuals over every pose: on an engine thread, not the request thread.
    const report = await runEngineTask('checkGeometry', geometry, poses);
    const [unit] = await database.select({ unitId: sessions.unitId }).from(sessions).where(eq(sessions.id, id));
    const verdicts = sessionVerdicts(geometry, poses, unit ? await unitJudgement(unit.unitId, database) : undefined, report.stats.rms);
    return {
      check: { stats: report.stats, registered: report.registered, poses: report.poses.map((p) => ({ label: p.label, line: p.line, error: p.error })), verdicts },
      geometry,
      base: report.base,
      residuals: report.poses.map((p) => ({ line: p.line, residual: p.residual })),
    };
  } catch (e) {
    if (!(e instanceof EngineInputError)) throw e;
    return { check: { stats: { n: 0, rms: 0, mean: 0, max: 0, p95: 0 }, registered: false, poses: [], problem: e.message }, geometry, base: undefined, residuals: [] };
  }
}

export interface SessionQuality extends PoseSetQuality {
  poseCount: number;
  /** True when the engine warned: too few or poorly spread poses. */
  poor: boolean;
}

/** How well the measured configurations determine the parameters (engine poseSetQuality). */
export async function sessionQuality(id: string, database: Db = sharedDb()): Promise<SessionQuality | undefined> {
  const geometry = await sessionGeometry(id, database);
  if (!geometry) return undefined;
  const rows = await database.select({ q: poseRows.q }).from(poseRows).where(eq(poseRows.sessionId, id)).orderBy(asc(poseRows.idx));
  const q = rows.map((r) => r.q);
  const quality = poseSetQuality(geometry, q);
  return { ...quality, poseCount: q.length, poor: quality.warnings.length > 0 };
}
