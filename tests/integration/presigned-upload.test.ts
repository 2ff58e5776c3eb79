/**
 * Presigned session uploads (POST /api/sessions/uploads) against the run's PostgreSQL and S3 fake: the file
 * goes by a presigned PUT straight to the store, the completion runs the same checks as the direct upload,
 * and every refusal leaves nothing behind — no session row, no object at a session key, no staging object.
 */
import { GetObjectCommand, ListObjectsV2Command, PutObjectCommand } from '@aws-sdk/client-s3';
import { eq, sql } from 'drizzle-orm';
import { createHash } from 'node:crypto';
import { readFileSync } from 'node:fs';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { armModelRevisions, armModels, sessionPoses, sessions, units } from '../../src/db/schema';
import type { ArmGeometry } from '../../src/lib/engine/types';
import { createDb } from '../../src/lib/server/db';
import { DEMO, signedIn, uniq, type Client } from '../support/http';
import { serviceEnv, startAppInstance } from '../support/services';
import { testS3 } from '../support/s3';

const env = serviceEnv();
const db = createDb(env.databaseUrl, { max: 2 });
const s3 = testS3();

const geometry = JSON.parse(readFileSync('test-data/orrin-r6-620-nominal.json', 'utf8')) as ArmGeometry;
const goodFile = readFileSync('test-data/orrin-r6-620-session.csv');
const sha = (b: Uint8Array) => createHash('sha256').update(b).digest('hex');
const META = { measuredOn: '2025-04-02', technician: 'Test Tech', instrument: 'tracker T-2', instrumentUncertainty: '±(10 µm + 5 µm/m), k = 2', ambientC: 20.5, target: '1.5 in SMR', notes: 'presigned' };

let revisionId: string;
let tech: Client;
let engineer: Client;

beforeAll(async () => {
  const [model] = await db.insert(armModels).values({ name: uniq('TEST-PRESIGN-'), description: 'presigned upload tests' }).returning();
  const [rev] = await db.insert(armModelRevisions).values({ modelId: model!.id, revision: 1, geometry }).returning();
  revisionId = rev!.id;
  [tech, engineer] = await Promise.all([signedIn(DEMO.technician), signedIn(DEMO.engineer)]);
});
afterAll(async () => {
  await db.$client.end();
});

async function newUnit(): Promise<{ id: string; serial: string }> {
  const serial = uniq('PS-');
  const [u] = await db.insert(units).values({ serial, modelRevisionId: revisionId, site: 'Test hall', cell: 'C2' }).returning();
  return { id: u!.id, serial };
}

async function keysUnder(prefix: string): Promise<string[]> {
  const out = await s3.send(new ListObjectsV2Command({ Bucket: env.s3.bucket, Prefix: prefix }));
  return (out.Contents ?? []).map((o) => o.Key!);
}

async function sessionCount(unitId: string): Promise<number> {
  const [row] = await db.select({ n: sql<number>`count(*)::int` }).from(sessions).where(eq(sessions.unitId, unitId));
  return row!.n;
}

async function expectNothingStored(unit: { id: string; serial: string }) {
  expect(await sessionCount(unit.id)).toBe(0);
  expect(await keysUnder(`sessions/${unit.serial}/`)).toEqual([]);
  expect(await keysUnder(`uploads/${unit.serial}/`)).toEqual([]);
}

const start = (client: Client, body: Record<string, unknown>) => client.json<any>('/api/sessions/uploads', { method: 'POST', json: body });
const complete = (client: Client, uploadId: string, extra: Record<string, unknown> = {}) =>
  client.json<any>('/api/sessions/uploads', { method: 'POST', json: { uploadId, complete: true, ...META, ...extra } });

/** PUT to the presigned URL as a browser would: no app cookie, only the signed URL and its content type. */
async function put(url: string, headers: Record<string, string>, bytes: Uint8Array) {
  const res = await fetch(url, { method: 'PUT', headers, body: bytes as Uint8Array<ArrayBuffer> });
  return res.status;
}

/** Start with the declared bytes, put `actual` (default the same bytes), complete. */
async function presigned(unit: { serial: string }, declared: Uint8Array, actual: Uint8Array = declared, fileName = 'visit.csv') {
  const started = await start(tech, { unit: unit.serial, fileName, bytes: declared.byteLength, sha256: sha(declared), ...META });
  expect(started.status, JSON.stringify(started.body)).toBe(201);
  expect(await put(started.body.url, started.body.headers, actual)).toBe(200);
  // The bytes sit under the staging key until the completion.
  expect(await keysUnder(`uploads/${unit.serial}/`)).toEqual([started.body.key]);
  return { started: started.body, done: await complete(tech, started.body.uploadId) };
}

describe('a good file', () => {
  it('goes by presigned PUT to a staging key, then becomes a session with the object at its final key, byte for byte', async () => {
    const unit = await newUnit();
    const { started, done } = await presigned(unit, goodFile);
    expect(started.key).toMatch(new RegExp(`^uploads/${unit.serial}/[0-9a-f-]{36}/visit\\.csv$`));
    expect(started.method).toBe('PUT');
    expect(new Date(started.expiresAt).getTime()).toBeGreaterThan(Date.now());
    expect(new URL(started.url).origin).toBe(new URL(env.s3.endpoint).origin);

    expect(done.status, JSON.stringify(done.body)).toBe(201);
    expect(done.body.poseCount).toBe(goodFile.toString('utf8').trim().split('\n').length - 1);
    const [row] = await db.select().from(sessions).where(eq(sessions.id, done.body.id));
    expect(row).toMatchObject({ unitId: unit.id, fileName: 'visit.csv', fileSha256: sha(goodFile), fileBytes: goodFile.byteLength, measuredOn: META.measuredOn, instrumentUncertainty: META.instrumentUncertainty, ambientC: 20.5 });
    expect(row!.fileKey).toMatch(new RegExp(`^sessions/${unit.serial}/${done.body.id}/`));
    const [{ n }] = (await db.select({ n: sql<number>`count(*)::int` }).from(sessionPoses).where(eq(sessionPoses.sessionId, done.body.id))) as [{ n: number }];
    expect(n).toBe(done.body.poseCount);

    const obj = await s3.send(new GetObjectCommand({ Bucket: env.s3.bucket, Key: row!.fileKey }));
    const stored = Buffer.from(await obj.Body!.transformToByteArray());
    expect(stored.equals(goodFile)).toBe(true);
    expect(obj.Metadata?.sha256).toBe(sha(goodFile));
    // The staging object was moved, not left behind.
    expect(await keysUnder(`uploads/${unit.serial}/`)).toEqual([]);
    // And the session's download gives the same bytes.
    const file = await tech.fetch(`/api/sessions/${done.body.id}/file`);
    expect(Buffer.from(await file.arrayBuffer()).equals(goodFile)).toBe(true);

    // The same completion again finds nothing to store.
    const again = await complete(tech, started.uploadId);
    expect(again.status).toBe(400);
    expect(again.body.errors[0]).toMatchObject({ field: 'file', message: expect.stringMatching(/no file was uploaded/) });
    // Starting the same file again for the unit is refused before any byte moves.
    const dup = await start(tech, { unit: unit.serial, fileName: 'visit.csv', bytes: goodFile.byteLength, sha256: sha(goodFile) });
    expect(dup.status).toBe(409);
    expect(dup.body.existing.id).toBe(done.body.id);
    expect(await sessionCount(unit.id)).toBe(1);
  });
});

describe('refusals leave nothing behind', () => {
  it('a bad file: 400 with the same problem list as the direct upload, staging object gone, no row', async () => {
    const unit = await newUnit();
    const bad = Buffer.from('pose;q1;q2;q3;q4;q5;q6;x;y;z\nP1;10;-20;30;0;45;0;2180.5;-512.3;640.1\n');
    const { done } = await presigned(unit, bad, bad, 'semicolons.csv');
    expect(done.status).toBe(400);
    expect(done.body.error).toMatch(/^semicolons\.csv: the session file was refused/);
    expect(done.body.errors[0]).toMatchObject({ line: 1, message: expect.stringMatching(/wrong delimiter.*";"/) });
    await expectNothingStored(unit);

    // The direct upload answers the same problems for the same bytes.
    const form = new FormData();
    form.append('unit', unit.serial);
    for (const [k, v] of Object.entries(META)) form.append(k, String(v));
    form.append('file', new Blob([bad], { type: 'text/csv' }), 'semicolons.csv');
    const direct = await tech.json<any>('/api/sessions', { method: 'POST', body: form });
    expect(direct.status).toBe(400);
    expect(direct.body.errors).toEqual(done.body.errors);
    await expectNothingStored(unit);
  });

  it('a SHA-256 mismatch (same size, one byte changed): 400 naming sha256', async () => {
    const unit = await newUnit();
    const changed = Buffer.from(goodFile);
    const at = changed.indexOf('.', 200);
    changed[at + 1] = changed[at + 1] === 0x31 ? 0x32 : 0x31;
    const { done } = await presigned(unit, goodFile, changed);
    expect(done.status).toBe(400);
    expect(done.body.errors).toEqual([expect.objectContaining({ field: 'sha256', message: expect.stringContaining(sha(changed)) })]);
    await expectNothingStored(unit);
  });

  it('a file of another size than declared: 400 naming bytes', async () => {
    const unit = await newUnit();
    const { done } = await presigned(unit, goodFile, goodFile.subarray(0, goodFile.byteLength - 40));
    expect(done.status).toBe(400);
    expect(done.body.errors[0]).toMatchObject({ field: 'bytes', message: expect.stringMatching(new RegExp(`not the ${goodFile.byteLength} declared`)) });
    await expectNothingStored(unit);
  });

  it('a completion without metadata: 400 for the missing date, staging object gone', async () => {
    const unit = await newUnit();
    const started = await start(tech, { unit: unit.serial, fileName: 'visit.csv', bytes: goodFile.byteLength, sha256: sha(goodFile) });
    expect(started.status).toBe(201);
    expect(await put(started.body.url, started.body.headers, goodFile)).toBe(200);
    const done = await tech.json<any>('/api/sessions/uploads', { method: 'POST', json: { uploadId: started.body.uploadId, complete: true } });
    expect(done.status).toBe(400);
    expect(done.body.errors.map((e: { field: string }) => e.field)).toEqual(['measuredOn']);
    await expectNothingStored(unit);
  });
});

describe('the uploadId', () => {
  it('is refused when altered, and completes only for the user who started it', async () => {
    const unit = await newUnit();
    const started = await start(tech, { unit: unit.serial, fileName: 'visit.csv', bytes: goodFile.byteLength, sha256: sha(goodFile) });
    expect(await put(started.body.url, started.body.headers, goodFile)).toBe(200);
    const [payload, mac] = (started.body.uploadId as string).split('.');
    const ticket = JSON.parse(Buffer.from(payload!, 'base64url').toString('utf8'));
    // Claim a smaller, different file under the same signature.
    const forged = `${Buffer.from(JSON.stringify({ ...ticket, bytes: 10 })).toString('base64url')}.${mac}`;
    const tampered = await complete(tech, forged);
    expect(tampered.status).toBe(400);
    expect(tampered.body.errors[0]).toMatchObject({ field: 'uploadId', message: expect.stringMatching(/signature/) });
    const other = await complete(engineer, started.body.uploadId);
    expect(other.status).toBe(403);
    expect(await sessionCount(unit.id)).toBe(0);
    // Neither attempt touched the staging object: the owner still completes it.
    const done = await complete(tech, started.body.uploadId);
    expect(done.status, JSON.stringify(done.body)).toBe(201);
    expect(await sessionCount(unit.id)).toBe(1);
  });
});

describe('starting an upload', () => {
  it('checks the unit, name, size, digest and metadata before any byte moves', async () => {
    const unit = await newUnit();
    const good = { unit: unit.serial, fileName: 'visit.csv', bytes: goodFile.byteLength, sha256: sha(goodFile) };
    const unknown = await start(tech, { ...good, unit: uniq('NOPE-') });
    expect(unknown.status).toBe(400);
    expect(unknown.body.errors).toEqual([expect.objectContaining({ field: 'unit', message: expect.stringMatching(/no unit with serial number/) })]);

    const several = await start(tech, { ...good, fileName: '../../etc/passwd', measuredOn: '2025-02-30', ambientC: '21,5' });
    expect(several.status).toBe(400);
    expect(several.body.errors.map((e: { field: string }) => e.field).sort()).toEqual(['ambientC', 'fileName', 'measuredOn']);

    const digest = await start(tech, { ...good, sha256: 'abc', bytes: 0 });
    expect(digest.status).toBe(400);
    expect(digest.body.errors.map((e: { field: string }) => e.field).sort()).toEqual(['bytes', 'sha256']);

    const huge = await start(tech, { ...good, bytes: 10 * 1024 * 1024 * 1024 });
    expect(huge.status).toBe(413);
    expect(huge.body.errors[0]).toMatchObject({ field: 'bytes', message: expect.stringMatching(/over the limit/) });

    const unknownField = await start(tech, { ...good, path: 'x' });
    expect(unknownField.status).toBe(400);

    // Nothing was signed or stored by any of these.
    await expectNothingStored(unit);
  });

  it('checks bytes that reached the staging key another way by their digest all the same', async () => {
    // (s3rver does not enforce the signed content type of a presigned PUT, as S3 does, so that is not tested here.)
    const unit = await newUnit();
    const started = await start(tech, { unit: unit.serial, fileName: 'visit.csv', bytes: goodFile.byteLength, sha256: sha(goodFile) });
    await s3.send(new PutObjectCommand({ Bucket: env.s3.bucket, Key: started.body.key, Body: Buffer.alloc(goodFile.byteLength, 0x41), ContentType: 'text/csv' }));
    const done = await complete(tech, started.body.uploadId);
    expect(done.status).toBe(400);
    expect(done.body.errors[0].field).toBe('sha256');
    await expectNothingStored(unit);
  });
});

describe('turned off', () => {
  it('answers 501 with presigned: false, so the form sends the file through the app instead', async () => {
    const app = await startAppInstance({ S3_PRESIGNED_UPLOADS: 'false' });
    try {
      const client = await signedIn(DEMO.technician, undefined, app.url);
      const unit = await newUnit();
      const res = await start(client, { unit: unit.serial, fileName: 'visit.csv', bytes: goodFile.byteLength, sha256: sha(goodFile) });
      expect(res.status).toBe(501);
      expect(res.body).toMatchObject({ presigned: false, error: expect.stringMatching(/POST \/api\/sessions/) });
      await expectNothingStored(unit);
    } finally {
      await app.stop();
    }
  });
});
