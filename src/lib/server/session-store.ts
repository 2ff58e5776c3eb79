/**
 * The session store: a checked session written all-or-nothing, and the look-ups an upload needs before it
 * (the unit it names, the same file already stored). Shared by the multipart upload (session-intake.ts), the
 * presigned upload (presigned-uploads.ts) and the demo scenario.
 *
 * Storage order, so nothing is ever half-stored: the object is written first under a key that contains the
 * new session id; then the session row, every pose and the audit entry go in one transaction. If the
 * transaction fails the object is deleted again; if S3 fails no row is written.
 */
import { CopyObjectCommand, PutObjectCommand } from '@aws-sdk/client-s3';
import { and, eq } from 'drizzle-orm';
import { randomUUID } from 'node:crypto';
import type { Readable } from 'node:stream';
import { armModelRevisions, sessions, units } from '../../db/schema';
import type { ParsedSession } from '../engine/session-csv';
import type { ArmGeometry, InputProblem } from '../engine/types';
import { cleanText } from '../shared/input';
import { audit } from './audit';
import { copyField, copyInto } from './bulk';
import { db as sharedDb, type Db } from './db';
import { isServiceUnavailable } from './http';
import { log } from './log';
import { bucket, deleteObject, s3 } from './s3';
import { refusal, sanitiseFileName, type SessionMeta, type UploadAccepted, type UploadRefusal } from './session-form';
import { sessionUrl } from '../shared/display';

export interface UnitTarget {
  id: string;
  serial: string;
  modelRevisionId: string;
  geometry: ArmGeometry;
}

/** The registered unit an upload names, with the geometry its CSV is checked against. */
export async function unitForUpload(serial: string, database: Db): Promise<UnitTarget | undefined> {
  const [row] = await database
    .select({ id: units.id, serial: units.serial, modelRevisionId: units.modelRevisionId, geometry: armModelRevisions.geometry })
    .from(units)
    .innerJoin(armModelRevisions, eq(armModelRevisions.id, units.modelRevisionId))
    .where(eq(units.serial, serial));
  return row;
}

/** The session already stored for this unit from a file with this SHA-256, if any (the same file again). */
export async function duplicateSession(unitId: string, sha256: string, database: Db): Promise<{ id: string; measuredOn: string } | undefined> {
  const [dup] = await database
    .select({ id: sessions.id, measuredOn: sessions.measuredOn })
    .from(sessions)
    .where(and(eq(sessions.unitId, unitId), eq(sessions.fileSha256, sha256)));
  return dup;
}

/** The 409 answer for a file this unit already has. */
export const duplicateRefusal = (serial: string, dup: { id: string; measuredOn: string }) =>
  refusal(409, `This file was already uploaded for unit ${serial} (the session measured on ${dup.measuredOn}); nothing new was stored.`, [], {
    existing: { id: dup.id, url: sessionUrl(dup.id) },
  });

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

/** A session's poses streamed with COPY … FROM STDIN (one statement), inside the caller's transaction. */
async function insertSessionPoses(tx: Tx, sessionId: string, poses: ParsedSession['poses'], outside: Set<number | undefined>): Promise<void> {
  const { text, num, bool, floats } = copyField;
  await copyInto(tx, 'session_poses', ['session_id', 'idx', 'line', 'label', 'q', 'x', 'y', 'z', 'split', 'outside_limits'], poses.length, (i) => {
    const p = poses[i]!;
    return [sessionId, i, p.line, text(p.label), floats(p.q), num(p.x), num(p.y), num(p.z), text(p.split ?? null), bool(outside.has(p.line))].join('\t');
  });
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
      const dup = await duplicateSession(input.unit.id, input.sha256, database);
      if (dup) return duplicateRefusal(input.unit.serial, dup);
    }
    if (isServiceUnavailable(e)) {
      return { ok: false, status: 503, body: { error: 'The database is not reachable, so the session was not stored (the file was removed again). Try the upload again shortly.', errors: [] } };
    }
    throw e;
  }
  return { ok: true, body: { id, url: sessionUrl(id), poseCount: input.parsed.poses.length, warnings } };
}
