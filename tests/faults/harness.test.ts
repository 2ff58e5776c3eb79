/**
 * The harness can take each shared service away and bring it back with its data: what the fault tests of
 * the app (database restart, S3 or mail down) build on. Runs in the serial pass (tests/faults/).
 */
import { GetObjectCommand, PutObjectCommand, S3Client } from '@aws-sdk/client-s3';
import { randomBytes } from 'node:crypto';
import nodemailer from 'nodemailer';
import postgres from 'postgres';
import { afterAll, describe, expect, it } from 'vitest';
import {
  capturedMail, harnessStatus, serviceEnv, startMail, startPostgres, startS3, stopMail, stopPostgres, stopS3, waitForMail,
} from '../support/services';

const env = serviceEnv();
const tag = randomBytes(6).toString('hex');

describe('stopping and starting services', () => {
  afterAll(async () => {
    // Leave everything running for the next file even when an assertion failed half-way.
    await startPostgres();
    await startS3();
    await startMail();
  });

  it('PostgreSQL: refuses connections while stopped, keeps committed rows across a restart', async () => {
    const table = `fault_${tag}`;
    const before = postgres(env.databaseUrl, { max: 1, onnotice: () => {} });
    await before`create table ${before(table)} (v text)`;
    await before`insert into ${before(table)} values ('kept')`;
    await before.end();

    await stopPostgres();
    expect((await harnessStatus()).postgres).toBe(false);
    const during = postgres(env.databaseUrl, { max: 1, connect_timeout: 2 });
    await expect(during`select 1`).rejects.toThrow(/ECONNREFUSED|connect/i);
    await during.end({ timeout: 1 });

    await startPostgres();
    expect((await harnessStatus()).postgres).toBe(true);
    const after = postgres(env.databaseUrl, { max: 1, onnotice: () => {} });
    expect((await after`select v from ${after(table)}`).map((r) => r.v)).toEqual(['kept']);
    await after`drop table ${after(table)}`;
    await after.end();
  });

  it('PostgreSQL: an immediate stop (like a crash) recovers on start', async () => {
    await stopPostgres('immediate');
    await startPostgres();
    const sql = postgres(env.databaseUrl, { max: 1 });
    expect((await sql`select 40 + 2 as n`)[0]?.n).toBe(42);
    await sql.end();
  });

  it('S3 fake: requests fail while stopped; stored objects survive', async () => {
    const s3 = new S3Client({
      endpoint: env.s3.endpoint,
      region: env.s3.region,
      credentials: { accessKeyId: env.s3.accessKeyId, secretAccessKey: env.s3.secretAccessKey },
      forcePathStyle: true,
      requestChecksumCalculation: 'WHEN_REQUIRED',
      responseChecksumValidation: 'WHEN_REQUIRED',
      maxAttempts: 1,
    });
    const key = `faults/${tag}.txt`;
    await s3.send(new PutObjectCommand({ Bucket: env.s3.bucket, Key: key, Body: 'survives' }));
    await stopS3();
    expect((await harnessStatus()).s3).toBe(false);
    await expect(s3.send(new GetObjectCommand({ Bucket: env.s3.bucket, Key: key }))).rejects.toThrow(/ECONNREFUSED|connect/i);
    await startS3();
    const got = await s3.send(new GetObjectCommand({ Bucket: env.s3.bucket, Key: key }));
    expect(await got.Body!.transformToString()).toBe('survives');
    s3.destroy();
  });

  it('mail fake: sending fails while stopped; captured mail survives', async () => {
    const transport = nodemailer.createTransport({ host: env.smtp.host, port: env.smtp.port, secure: false, connectionTimeout: 2000 });
    const subject = `before the outage ${tag}`;
    await transport.sendMail({ from: 'no-reply@offsetry.local', to: 'fault@example.com', subject, text: 'x' });
    await stopMail();
    expect((await harnessStatus()).mail).toBe(false);
    await expect(
      transport.sendMail({ from: 'no-reply@offsetry.local', to: 'fault@example.com', subject: 'during', text: 'x' }),
    ).rejects.toThrow(/ECONNREFUSED|connect/i);
    await startMail();
    await waitForMail((m) => m.subject === subject);
    expect((await capturedMail()).some((m) => m.subject === 'during')).toBe(false);
    transport.close();
  });
});
