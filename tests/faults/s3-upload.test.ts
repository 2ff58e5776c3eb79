/**
 * The S3 fake is stopped while a session upload is streaming in: the upload is refused with a clear 503, no
 * row and no object remain, and the same upload succeeds once the store is back — without restarting the app.
 * (Fault tests run one file at a time: this one stops the run's shared S3 fake.)
 */
import { ListObjectsV2Command } from '@aws-sdk/client-s3';
import { eq, sql } from 'drizzle-orm';
import { readFileSync } from 'node:fs';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { armModelRevisions, armModels, sessions, units } from '../../src/db/schema';
import type { ArmGeometry } from '../../src/lib/engine/types';
import { createDb } from '../../src/lib/server/db';
import { DEMO, signedIn, uniq, type Client } from '../support/http';
import { serviceEnv, startS3, stopS3 } from '../support/services';
import { testS3 } from '../support/s3';

const env = serviceEnv();
const db = createDb(env.databaseUrl, { max: 2 });
const s3 = testS3();
const geometry = JSON.parse(readFileSync('test-data/orrin-r6-620-nominal.json', 'utf8')) as ArmGeometry;
const csv = readFileSync('test-data/orrin-r6-620-session.csv');

let tech: Client;
let unit: { id: string; serial: string };

beforeAll(async () => {
  const [model] = await db.insert(armModels).values({ name: uniq('FAULT-R6-'), description: 's3 fault test' }).returning();
  const [rev] = await db.insert(armModelRevisions).values({ modelId: model!.id, revision: 1, geometry }).returning();
  const serial = uniq('S3F-');
  const [u] = await db.insert(units).values({ serial, modelRevisionId: rev!.id, site: 'Fault hall', cell: 'F1' }).returning();
  unit = { id: u!.id, serial };
  tech = await signedIn(DEMO.technician);
});
afterAll(async () => {
  await startS3();
  await db.$client.end();
});

/**
 * A multipart body whose second half is held back until `release` resolves. `firstHalfSent` resolves when the
 * request has taken the head and the first half of the file and asks for more (the stream has no buffer of its
 * own: highWaterMark 0), i.e. when that part has been handed to the connection.
 */
function slowMultipart(release: Promise<void>) {
  const boundary = '----offsetry-fault-' + Math.random().toString(36).slice(2);
  const field = (name: string, value: string) => `--${boundary}\r\ncontent-disposition: form-data; name="${name}"\r\n\r\n${value}\r\n`;
  const head = new TextEncoder().encode(
    field('unit', unit.serial) +
      field('measuredOn', '2025-06-01') +
      field('technician', 'Fault Test') +
      `--${boundary}\r\ncontent-disposition: form-data; name="file"; filename="fault.csv"\r\ncontent-type: text/csv\r\n\r\n`,
  );
  const tail = new TextEncoder().encode(`\r\n--${boundary}--\r\n`);
  const half = Math.floor(csv.length / 2);
  let sent!: () => void;
  const firstHalfSent = new Promise<void>((r) => (sent = r));
  const parts = [head, csv.subarray(0, half)];
  const body = new ReadableStream<Uint8Array>(
    {
      async pull(controller) {
        const next = parts.shift();
        if (next) return controller.enqueue(next);
        sent();
        await release;
        controller.enqueue(csv.subarray(half));
        controller.enqueue(tail);
        controller.close();
      },
    },
    { highWaterMark: 0 },
  );
  return { body, firstHalfSent, contentType: `multipart/form-data; boundary=${boundary}` };
}

async function leftovers() {
  const [row] = await db.select({ n: sql<number>`count(*)::int` }).from(sessions).where(eq(sessions.unitId, unit.id));
  const objects = await s3.send(new ListObjectsV2Command({ Bucket: env.s3.bucket, Prefix: `sessions/${unit.serial}/` }));
  return { rows: row?.n ?? 0, objects: objects.KeyCount ?? 0 };
}

describe('S3 stopped during an upload', () => {
  it('answers 503 with a clear message, stores nothing, and the retry succeeds', async () => {
    let release!: () => void;
    const gate = new Promise<void>((r) => (release = r));
    const { body, firstHalfSent, contentType } = slowMultipart(gate);
    const pending = tech.json<any>('/api/sessions', { method: 'POST', body, headers: { 'content-type': contentType }, duplex: 'half' } as RequestInit);
    // Half of the file is on its way; now the store goes away, then the rest of the file arrives.
    await firstHalfSent;
    await stopS3();
    release();
    const refused = await pending;
    expect(refused.status).toBe(503);
    expect(refused.body.error).toMatch(/S3|file store/i);

    await startS3();
    expect(await leftovers()).toEqual({ rows: 0, objects: 0 });

    const form = new FormData();
    form.append('unit', unit.serial);
    form.append('measuredOn', '2025-06-01');
    form.append('technician', 'Fault Test');
    form.append('file', new Blob([csv], { type: 'text/csv' }), 'fault.csv');
    const retry = await tech.json<any>('/api/sessions', { method: 'POST', body: form });
    expect(retry.status, JSON.stringify(retry.body)).toBe(201);
    expect(await leftovers()).toEqual({ rows: 1, objects: 1 });
  });
});
