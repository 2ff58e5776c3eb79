/**
 * Presigned uploads from a real browser (Debian's chromium): a page on the app's origin PUTs straight to
 * the S3 fake's presigned URL (a cross-origin request with a CORS preflight, allowed by the fake's bucket
 * CORS rule), and the upload form sends a file above 5 MB that way instead of through the app.
 */
import { GetObjectCommand, ListObjectsV2Command } from '@aws-sdk/client-s3';
import { eq } from 'drizzle-orm';
import { createHash } from 'node:crypto';
import { readFileSync } from 'node:fs';
import type { Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { armModelRevisions, armModels, sessions, units } from '../../src/db/schema';
import { forwardPoint } from '../../src/lib/engine/kinematics';
import type { ArmGeometry } from '../../src/lib/engine/types';
import { createDb } from '../../src/lib/server/db';
import { launchBrowser, signInPage } from '../support/browser';
import { BASE_URL, DEMO, uniq } from '../support/http';
import { serviceEnv } from '../support/services';
import { testS3 } from '../support/s3';

const env = serviceEnv();
const db = createDb(env.databaseUrl, { max: 2 });
const s3 = testS3();
const nominal = JSON.parse(readFileSync('test-data/orrin-r6-620-nominal.json', 'utf8')) as ArmGeometry;
const truth = JSON.parse(readFileSync('test-data/orrin-r6-620-true.json', 'utf8')) as ArmGeometry;
const goodFile = readFileSync('test-data/orrin-r6-620-session.csv');
const sha = (b: Uint8Array) => createHash('sha256').update(b).digest('hex');

let browser: Browser;
let revisionId: string;

async function newUnit() {
  const serial = uniq('PB-');
  const [u] = await db.insert(units).values({ serial, modelRevisionId: revisionId, site: 'Test hall', cell: 'B3' }).returning();
  return { id: u!.id, serial };
}

/** An invented session of more than `bytes` bytes: random joint readings within 80 % of the limits, points of the "true" arm. */
function bigSession(bytes: number): Buffer {
  let s = 4242;
  const r = () => ((s = (s * 16807) % 2147483647) / 2147483647);
  const lines = [`pose,${nominal.joints.map((_, i) => `q${i + 1}`).join(',')},x,y,z`];
  let size = lines[0]!.length + 1;
  for (let i = 1; size <= bytes; i++) {
    const q = nominal.joints.map((j) => Number((j.min! * 0.8 + (j.max! - j.min!) * 0.8 * r()).toFixed(3)));
    const p = forwardPoint(truth, q);
    const line = `P${i},${q.join(',')},${p.map((v) => (v + (r() - 0.5) * 0.03).toFixed(4)).join(',')}`;
    lines.push(line);
    size += line.length + 1;
  }
  return Buffer.from(lines.join('\n') + '\n');
}

beforeAll(async () => {
  browser = await launchBrowser();
  const [model] = await db.insert(armModels).values({ name: uniq('BROWSER-PS-') }).returning();
  const [rev] = await db.insert(armModelRevisions).values({ modelId: model!.id, revision: 1, geometry: nominal }).returning();
  revisionId = rev!.id;
});
afterAll(async () => {
  await browser?.close();
  await db.$client.end();
});

describe('presigned upload in chromium', () => {
  it('a page on the app origin PUTs to the presigned URL (CORS) and completes the upload', async () => {
    const unit = await newUnit();
    const context = await browser.newContext();
    const page = await context.newPage();
    await signInPage(page, DEMO.technician);
    const out = await page.evaluate(
      async ({ serial, csv, digest }) => {
        const post = async (body: unknown) => {
          const res = await fetch('/api/sessions/uploads', { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify(body) });
          return { status: res.status, body: await res.json() };
        };
        const meta = { measuredOn: '2025-05-06', instrument: 'tracker LT-42' };
        const started = await post({ unit: serial, fileName: 'from-browser.csv', bytes: new TextEncoder().encode(csv).byteLength, sha256: digest, ...meta });
        const put = await fetch(started.body.url, { method: 'PUT', headers: started.body.headers, body: csv });
        const done = await post({ uploadId: started.body.uploadId, complete: true, ...meta });
        return { origin: location.origin, url: started.body.url as string, put: put.status, etag: put.headers.get('etag'), done };
      },
      { serial: unit.serial, csv: goodFile.toString('utf8'), digest: sha(goodFile) },
    );
    // Cross-origin: the app and the store are different origins.
    expect(new URL(out.url).origin).not.toBe(out.origin);
    expect(out.put).toBe(200);
    // The CORS rule exposes the ETag to the page.
    expect(out.etag).toMatch(/^"[0-9a-f]{32}"$/);
    expect(out.done.status, JSON.stringify(out.done.body)).toBe(201);
    const [row] = await db.select().from(sessions).where(eq(sessions.id, out.done.body.id));
    expect(row).toMatchObject({ unitId: unit.id, fileSha256: sha(goodFile), instrument: 'tracker LT-42' });
    const obj = await s3.send(new GetObjectCommand({ Bucket: env.s3.bucket, Key: row!.fileKey }));
    expect(Buffer.from(await obj.Body!.transformToByteArray()).equals(goodFile)).toBe(true);
    await context.close();
  });

  it('the upload form sends a file above 5 MB straight to the store, and the session is stored', async () => {
    const unit = await newUnit();
    const file = bigSession(5.5 * 1024 * 1024);
    const context = await browser.newContext({ viewport: { width: 768, height: 1024 } });
    const page = await context.newPage();
    const puts: string[] = [];
    const appPosts: { url: string; bytes: number }[] = [];
    page.on('request', (req) => {
      if (req.method() === 'PUT') puts.push(req.url());
      if (req.method() === 'POST' && req.url().startsWith(BASE_URL)) appPosts.push({ url: new URL(req.url()).pathname, bytes: req.postDataBuffer()?.byteLength ?? 0 });
    });
    await signInPage(page, DEMO.technician);
    await page.goto(`${BASE_URL}/sessions/new?unit=${unit.serial}`);
    await page.locator('[data-file-input]').setInputFiles({ name: 'long-visit.csv', mimeType: 'text/csv', buffer: file });
    await page.getByLabel('Laser tracker / instrument id').fill('tracker LT-43');
    const completion = page.waitForResponse((res) => res.url() === `${BASE_URL}/api/sessions/uploads` && res.request().postData()?.includes('"complete":true') === true, { timeout: 90_000 });
    await page.getByRole('button', { name: 'Upload session' }).click();
    // The form opens the new session at once, so the answer's body is read from the page's address.
    expect((await completion).status()).toBe(201);
    await page.waitForURL(/\/sessions\/[0-9a-f-]{36}$/, { timeout: 60_000 });
    const id = new URL(page.url()).pathname.split('/').at(-1)!;

    // One PUT to the store; the app only saw the two small JSON requests, never the file.
    expect(puts).toHaveLength(1);
    expect(new URL(puts[0]!).origin).toBe(new URL(env.s3.endpoint).origin);
    expect(appPosts.map((p) => p.url).filter((u) => u.startsWith('/api/sessions'))).toEqual(['/api/sessions/uploads', '/api/sessions/uploads']);
    expect(Math.max(...appPosts.map((p) => p.bytes))).toBeLessThan(10_000);

    const [row] = await db.select().from(sessions).where(eq(sessions.id, id));
    expect(row).toMatchObject({ unitId: unit.id, fileBytes: file.byteLength, fileSha256: sha(file), instrument: 'tracker LT-43' });
    expect(row!.poseCount).toBe(file.toString('utf8').trim().split('\n').length - 1);
    const obj = await s3.send(new GetObjectCommand({ Bucket: env.s3.bucket, Key: row!.fileKey }));
    expect(Buffer.from(await obj.Body!.transformToByteArray()).equals(file)).toBe(true);
    const staging = await s3.send(new ListObjectsV2Command({ Bucket: env.s3.bucket, Prefix: `uploads/${unit.serial}/` }));
    expect(staging.Contents ?? []).toEqual([]);
    await context.close();
  }, 180_000);
});
