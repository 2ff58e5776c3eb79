/**
 * POST /api/sessions against the real PostgreSQL and S3 fake of the test run: every bad-input case of the
 * upload is refused with line, column and message, and leaves nothing behind (no row, no object); good
 * files are stored byte for byte; the same file twice is recognised; S3 failure answers 503 and a retry works.
 */
import { ListObjectsV2Command } from '@aws-sdk/client-s3';
import { eq, sql } from 'drizzle-orm';
import { createHash } from 'node:crypto';
import { readFileSync } from 'node:fs';
import net from 'node:net';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { armModelRevisions, armModels, sessionPoses, sessions, units } from '../../src/db/schema';
import { forwardPoint } from '../../src/lib/engine/kinematics';
import { sessionToCsv } from '../../src/lib/engine/session-csv';
import type { ArmGeometry, SessionPose } from '../../src/lib/engine/types';
import { createDb } from '../../src/lib/server/db';
import { DEMO, signedIn, uniq, type Client } from '../support/http';
import { serviceEnv, startAppInstance, type AppInstance } from '../support/services';
import { testS3 } from '../support/s3';

const env = serviceEnv();
const db = createDb(env.databaseUrl, { max: 2 });
const s3 = testS3();

const geometry = JSON.parse(readFileSync('test-data/orrin-r6-620-nominal.json', 'utf8')) as ArmGeometry;
const goodFile = readFileSync('test-data/orrin-r6-620-session.csv');
const HEADER = 'pose,q1,q2,q3,q4,q5,q6,x,y,z';
const ROW1 = 'P1,10,-20,30,0,45,0,2180.5123,-512.3301,640.1102';
const ROW2 = 'P2,-15,-35,55,20,-30,90,2050.2231,-820.7704,720.4455';
const ROW3 = 'P3,40,10,-20,5,60,-45,1990.0101,-400.2202,810.3303';

let revisionId: string;
let tech: Client;

beforeAll(async () => {
  const [model] = await db.insert(armModels).values({ name: uniq('TEST-R6-'), description: 'upload tests' }).returning();
  const [rev] = await db.insert(armModelRevisions).values({ modelId: model!.id, revision: 1, geometry }).returning();
  revisionId = rev!.id;
  tech = await signedIn(DEMO.technician);
});
afterAll(async () => {
  await db.$client.end();
});

async function newUnit(): Promise<{ id: string; serial: string }> {
  const serial = uniq('UP-');
  const [u] = await db.insert(units).values({ serial, modelRevisionId: revisionId, site: 'Test hall', cell: 'C1' }).returning();
  return { id: u!.id, serial };
}

interface Upload {
  unit: string;
  file: string | Uint8Array;
  fileName?: string;
  fields?: Record<string, string>;
}

async function upload(client: Client, u: Upload) {
  const form = new FormData();
  form.append('unit', u.unit);
  const fields = { measuredOn: '2025-03-14', technician: 'Test Tech', instrument: 'tracker T-1', instrumentUncertainty: '±(15 µm + 6 µm/m), k = 2', ambientC: '21.5', target: '1.5 in SMR', notes: '', ...u.fields };
  for (const [k, v] of Object.entries(fields)) form.append(k, v);
  const bytes = typeof u.file === 'string' ? new TextEncoder().encode(u.file) : u.file;
  form.append('file', new Blob([bytes as Uint8Array<ArrayBuffer>], { type: 'text/csv' }), u.fileName ?? 'session.csv');
  return client.json<any>('/api/sessions', { method: 'POST', body: form });
}

async function objectsUnder(serial: string): Promise<string[]> {
  const out = await s3.send(new ListObjectsV2Command({ Bucket: env.s3.bucket, Prefix: `sessions/${serial}/` }));
  return (out.Contents ?? []).map((o) => o.Key!);
}

async function sessionCount(unitId: string): Promise<number> {
  const [row] = await db.select({ n: sql<number>`count(*)::int` }).from(sessions).where(eq(sessions.unitId, unitId));
  return row!.n;
}

async function expectNothingStored(unit: { id: string; serial: string }) {
  expect(await sessionCount(unit.id)).toBe(0);
  expect(await objectsUnder(unit.serial)).toEqual([]);
}

const lines = (...rows: string[]) => rows.join('\n') + '\n';

/** Refused with 400; returns the listed problems after checking nothing was stored. */
async function refused(file: string | Uint8Array, extra: Partial<Upload> = {}) {
  const unit = await newUnit();
  const res = await upload(tech, { unit: unit.serial, file, ...extra });
  expect(res.status, JSON.stringify(res.body)).toBe(400);
  expect(typeof res.body.error).toBe('string');
  expect(Array.isArray(res.body.errors)).toBe(true);
  await expectNothingStored(unit);
  return res.body.errors as { line?: number; column?: string; field?: string; message: string; expected?: string }[];
}

describe('bad files are refused with line, column and message, and nothing is stored', () => {
  it('empty file', async () => {
    const errors = await refused('');
    expect(errors[0]).toMatchObject({ line: 1, message: expect.stringMatching(/empty/) });
    expect(errors[0]!.expected).toMatch(/pose,q1/);
  });

  it('header only', async () => {
    const errors = await refused(lines(HEADER));
    expect(errors[0]).toMatchObject({ line: 2, message: expect.stringMatching(/header but no data rows/) });
  });

  it('wrong delimiter (semicolons)', async () => {
    const errors = await refused(lines(HEADER.replaceAll(',', ';'), ROW1.replaceAll(',', ';')));
    expect(errors[0]).toMatchObject({ line: 1, message: expect.stringMatching(/wrong delimiter.*";"/) });
  });

  it('wrong delimiter (tabs) with decimal commas', async () => {
    const errors = await refused(lines(HEADER.replaceAll(',', '\t'), 'P1\t10\t-20\t30\t0\t45\t0\t2180,5\t-512,3\t640,1'));
    expect(errors[0]).toMatchObject({ line: 1, message: expect.stringMatching(/tabs.*decimal comma/) });
  });

  it('decimal comma inside a comma-separated file', async () => {
    const errors = await refused(lines(HEADER, ROW1, 'P2,-15,-35,55,20,-30,90,2050,2231,-820,7704,720,4455'));
    expect(errors[0]).toMatchObject({ line: 3, message: expect.stringMatching(/decimal comma/) });
  });

  it('missing joint column', async () => {
    const errors = await refused(lines('pose,q1,q2,q3,q4,q5,x,y,z', 'P1,10,-20,30,0,45,2180.5,-512.3,640.1'));
    expect(errors[0]).toMatchObject({ line: 1, column: 'q6', message: expect.stringMatching(/missing joint column q6.*has 6 joints/) });
  });

  it('extra joint column', async () => {
    const errors = await refused(lines('pose,q1,q2,q3,q4,q5,q6,q7,x,y,z', 'P1,10,-20,30,0,45,0,5,2180.5,-512.3,640.1'));
    expect(errors[0]).toMatchObject({ line: 1, column: 'q7', message: expect.stringMatching(/extra joint column q7/) });
  });

  it('duplicated header column', async () => {
    const errors = await refused(lines(HEADER + ',q2', ROW1 + ',-20'));
    expect(errors[0]).toMatchObject({ line: 1, column: 'q2', message: expect.stringMatching(/duplicated header column "q2"/) });
  });

  it('header repeated as a data row', async () => {
    const errors = await refused(lines(HEADER, ROW1, HEADER, ROW2));
    expect(errors[0]).toMatchObject({ line: 3, message: expect.stringMatching(/header is repeated/) });
  });

  it('non-numeric, NaN and Infinity cells, each with its line and column', async () => {
    const errors = await refused(lines(HEADER, ROW1, 'P2,-15,abc,55,20,-30,90,2050.2231,-820.7704,720.4455', 'P3,40,10,-20,5,60,-45,NaN,-400.2202,810.3303', 'P4,1,2,3,4,5,6,7,8,Infinity'));
    expect(errors).toEqual([
      expect.objectContaining({ line: 3, column: 'q2', message: expect.stringMatching(/"abc" is not a number/), expected: expect.stringMatching(/deg/) }),
      expect.objectContaining({ line: 4, column: 'x', message: expect.stringMatching(/NaN/), expected: expect.stringMatching(/mm/) }),
      expect.objectContaining({ line: 5, column: 'z', message: expect.stringMatching(/Infinity/) }),
    ]);
  });

  it('blank lines count in the line numbers of a later problem', async () => {
    const errors = await refused(['pose,q1,q2,q3,q4,q5,q6,x,y,z', '', ROW1, '', '', 'P2,-15,-35,55,20,x5,90,2050.2231,-820.7704,720.4455', ''].join('\n'));
    expect(errors[0]).toMatchObject({ line: 6, column: 'q5' });
  });

  it('joint readings outside the model limits: refused, then accepted with the override', async () => {
    const unit = await newUnit();
    const file = lines(HEADER, ROW1, 'P2,171.5,-35,55,20,-30,90,2050.2231,-820.7704,720.4455', ROW3);
    const first = await upload(tech, { unit: unit.serial, file });
    expect(first.status).toBe(400);
    expect(first.body.outsideLimits).toBe(true);
    expect(first.body.errors).toEqual([expect.objectContaining({ line: 3, column: 'q1', message: expect.stringMatching(/J1 reading 171.5 deg is outside/), expected: '-165 to 165 deg' })]);
    await expectNothingStored(unit);

    const second = await upload(tech, { unit: unit.serial, file, fields: { allowOutsideLimits: 'true' } });
    expect(second.status, JSON.stringify(second.body)).toBe(201);
    expect(second.body.poseCount).toBe(3);
    const [row] = await db.select().from(sessions).where(eq(sessions.id, second.body.id));
    expect(row!.outsideLimitsOverride).toBe(true);
    const flagged = await db.select({ line: sessionPoses.line, out: sessionPoses.outsideLimits }).from(sessionPoses).where(eq(sessionPoses.sessionId, second.body.id)).orderBy(sessionPoses.idx);
    expect(flagged).toEqual([{ line: 2, out: false }, { line: 3, out: true }, { line: 4, out: false }]);
  });

  it('duplicate pose labels that are not repeats', async () => {
    const errors = await refused(lines(HEADER, ROW1, ROW2, 'P1,11,-20,30,0,45,0,2180.5123,-512.3301,640.1102'));
    expect(errors[0]).toMatchObject({ line: 4, column: 'pose', message: expect.stringMatching(/duplicate pose label "P1" is not a repeat: joints differ from line 2/) });
  });

  it.each([
    ['PNG', [0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a, 0, 0, 0, 13], /PNG image/, 1],
    ['ZIP', [0x50, 0x4b, 0x03, 0x04, 20, 0, 0, 0, 8, 0], /ZIP archive/, 1],
    ['PDF', [...Buffer.from('%PDF-1.7\n%\xe2\xe3\n')], /PDF document/, 1],
    ['NUL bytes on line 2', [...Buffer.from('pose,q1\nP1,\0\0\0')], /NUL bytes/, 2],
  ])('not a CSV file: %s', async (_name, bytes, kind, line) => {
    const errors = await refused(new Uint8Array(bytes as number[]), { fileName: 'export.csv' });
    expect(errors[0]!.message).toMatch(/not a CSV text file/);
    expect(errors[0]!.message).toMatch(kind as RegExp);
    expect(errors[0]!.line).toBe(line);
  });

  it('invalid UTF-8 is not a CSV text file, with the line of the bad byte', async () => {
    const bytes = Buffer.concat([Buffer.from(lines(HEADER, ROW1)), Buffer.from([0x50, 0x32, 0x2c, 0xff, 0xfe, 0x0a])]);
    const errors = await refused(new Uint8Array(bytes));
    expect(errors[0]).toMatchObject({ line: 3, message: expect.stringMatching(/not valid UTF-8/) });
  });

  it('every problem of a long bad file up to the cap, and says it is capped', async () => {
    const rows = Array.from({ length: 150 }, (_, k) => `P${k},x,-20,30,0,45,0,1,2,3`);
    const unit = await newUnit();
    const res = await upload(tech, { unit: unit.serial, file: lines(HEADER, ...rows) });
    expect(res.status).toBe(400);
    expect(res.body.errors).toHaveLength(100);
    expect(res.body.truncated).toBe(true);
    expect(res.body.error).toMatch(/only the first 100 are listed/);
    expect(res.body.errors[99]).toMatchObject({ line: 101, column: 'q1' });
    await expectNothingStored(unit);
  });
});

describe('metadata is checked with the file', () => {
  it('lists every form problem: date, temperature, unknown field, path-like name', async () => {
    const unit = await newUnit();
    const form = new FormData();
    form.append('unit', unit.serial);
    form.append('measuredOn', '2025-02-30');
    form.append('ambientC', '21,5');
    form.append('colour', 'teal');
    form.append('file', new Blob([goodFile]), '../../etc/session.csv');
    const res = await tech.json<any>('/api/sessions', { method: 'POST', body: form });
    expect(res.status).toBe(400);
    const byField = Object.fromEntries(res.body.errors.map((e: any) => [e.field, e.message]));
    expect(byField.measuredOn).toMatch(/not a calendar date/);
    expect(byField.ambientC).toMatch(/decimal comma/);
    expect(byField.colour).toMatch(/unknown field "colour"/);
    expect(byField.file).toMatch(/looks like a path/);
    await expectNothingStored(unit);
  });

  it('an unknown unit, a temperature out of range and a missing file', async () => {
    const form = new FormData();
    form.append('unit', uniq('NOPE-'));
    form.append('measuredOn', '2025-02-03');
    form.append('ambientC', '75');
    const res = await tech.json<any>('/api/sessions', { method: 'POST', body: form });
    expect(res.status).toBe(400);
    const fields = res.body.errors.map((e: any) => `${e.field}: ${e.message}`);
    expect(fields).toEqual(expect.arrayContaining([expect.stringMatching(/^ambientC: .*outside −20 to 60/), expect.stringMatching(/^file: no session file/)]));
  });

  it('the file before the unit field is still checked against the unit', async () => {
    const unit = await newUnit();
    const form = new FormData();
    form.append('file', new Blob([lines(HEADER, ROW1, 'P2,-15,abc,55,20,-30,90,2050.2231,-820.7704,720.4455')]), 'late-unit.csv');
    form.append('unit', unit.serial);
    form.append('measuredOn', '2025-02-03');
    const res = await tech.json<any>('/api/sessions', { method: 'POST', body: form });
    expect(res.status).toBe(400);
    expect(res.body.errors[0]).toMatchObject({ line: 3, column: 'q2' });
    await expectNothingStored(unit);
  });

  it('a body that is not multipart is refused with 415', async () => {
    const res = await tech.json<any>('/api/sessions', { method: 'POST', json: { unit: 'X' } });
    expect(res.status).toBe(415);
    expect(res.body.error).toMatch(/multipart\/form-data/);
  });
});

describe('good uploads', () => {
  it('stores the file unchanged and the poses; download is byte-identical with the same SHA-256', async () => {
    const unit = await newUnit();
    const res = await upload(tech, { unit: unit.serial, file: goodFile, fileName: 'R6 visit 1.csv' });
    expect(res.status, JSON.stringify(res.body)).toBe(201);
    const expectedRows = goodFile.toString().trim().split('\n').length - 1;
    expect(res.body).toMatchObject({ poseCount: expectedRows, url: `/sessions/${res.body.id}` });

    const keys = await objectsUnder(unit.serial);
    expect(keys).toEqual([`sessions/${unit.serial}/${res.body.id}/R6_visit_1.csv`]);

    const file = await tech.fetch(`/api/sessions/${res.body.id}/file`);
    expect(file.status).toBe(200);
    expect(file.headers.get('content-disposition')).toMatch(/attachment; filename="R6 visit 1.csv"/);
    const bytes = Buffer.from(await file.arrayBuffer());
    expect(Buffer.compare(bytes, goodFile)).toBe(0);
    const sha = createHash('sha256').update(goodFile).digest('hex');
    expect(createHash('sha256').update(bytes).digest('hex')).toBe(sha);

    const meta = await tech.json<any>(`/api/sessions/${res.body.id}`);
    expect(meta.status).toBe(200);
    expect(meta.body.session).toMatchObject({ fileSha256: sha, fileBytes: goodFile.length, poseCount: expectedRows, technician: 'Test Tech', instrumentUncertainty: '±(15 µm + 6 µm/m), k = 2', ambientC: 21.5, hasSplit: true, unit: { serial: unit.serial } });

    const page2 = await tech.json<any>(`/api/sessions/${res.body.id}/poses?page=2&pageSize=10`);
    expect(page2.status).toBe(200);
    expect(page2.body.total).toBe(expectedRows);
    expect(page2.body.poses).toHaveLength(10);
    expect(page2.body.poses[0]).toMatchObject({ idx: 10, line: 12 });
    const line12 = goodFile.toString().split('\n')[11]!.split(',');
    expect(page2.body.poses[0].label).toBe(line12[0]);
    expect(page2.body.poses[0].x).toBe(Number(line12[7]));

    const check = await tech.json<any>(`/api/sessions/${res.body.id}/check`);
    expect(check.status).toBe(200);
    expect(check.body.check.poses).toHaveLength(Math.min(expectedRows, 500));
    expect(check.body.check.posePage).toEqual({ page: 1, pageSize: 500, total: expectedRows, order: 'file' });
    const refused = await tech.json<any>(`/api/sessions/${res.body.id}/check?pageSize=5000&order=worst`);
    expect(refused.status).toBe(400);
    expect(refused.body.errors.map((e: { field: string }) => e.field).sort()).toEqual(['order', 'pageSize']);
    expect(check.body.check.registered).toBe(true);
    // The file was generated from a "true" geometry a few tenths of a mm off the nominal: the nominal
    // error is clearly above tracker noise but below a few mm.
    expect(check.body.check.stats.rms).toBeGreaterThan(0.05);
    expect(check.body.check.stats.rms).toBeLessThan(10);
    expect(check.body.quality.parameterCount).toBeGreaterThan(20);
    expect(check.body.quality.poseCount).toBe(expectedRows);

    const list = await tech.json<any>(`/api/sessions?unit=${unit.serial}`);
    expect(list.body).toMatchObject({ total: 1, sessions: [{ id: res.body.id, unit: unit.serial }] });
  });

  it('accepts a byte-order mark, Windows line ends and blank lines, with the right line numbers', async () => {
    const unit = await newUnit();
    const text = '\ufeff' + [HEADER, '', ROW1, '', ROW2, ROW3, ''].join('\r\n');
    const res = await upload(tech, { unit: unit.serial, file: text });
    expect(res.status, JSON.stringify(res.body)).toBe(201);
    const poses = await tech.json<any>(`/api/sessions/${res.body.id}/poses`);
    expect(poses.body.poses.map((p: any) => [p.label, p.line])).toEqual([['P1', 3], ['P2', 5], ['P3', 6]]);
    const file = Buffer.from(await (await tech.fetch(`/api/sessions/${res.body.id}/file`)).arrayBuffer());
    expect(file.toString('utf8')).toBe(text); // BOM and CRLF kept: the file is stored unchanged
  });

  it('keeps unknown columns as warnings', async () => {
    const unit = await newUnit();
    const res = await upload(tech, { unit: unit.serial, file: lines(HEADER + ',operator', ROW1 + ',ann', ROW2 + ',bo', ROW3 + ',cy') });
    expect(res.status).toBe(201);
    expect(res.body.warnings).toEqual([expect.objectContaining({ line: 1, column: 'operator', message: expect.stringMatching(/unknown column/) })]);
  });

  it('the same file twice for the same unit is refused with a link to the first', async () => {
    const unit = await newUnit();
    const first = await upload(tech, { unit: unit.serial, file: goodFile });
    expect(first.status).toBe(201);
    const again = await upload(tech, { unit: unit.serial, file: goodFile, fileName: 'renamed.csv', fields: { measuredOn: '2025-04-01' } });
    expect(again.status).toBe(409);
    expect(again.body.existing).toEqual({ id: first.body.id, url: `/sessions/${first.body.id}` });
    expect(again.body.error).toMatch(/already uploaded/);
    expect(await sessionCount(unit.id)).toBe(1);
    expect(await objectsUnder(unit.serial)).toHaveLength(1);
    // Another unit may store the same bytes.
    const other = await newUnit();
    expect((await upload(tech, { unit: other.serial, file: goodFile })).status).toBe(201);
  });

  it('stores a 100 000-pose session (spooled to a temporary file, batched inserts) unchanged', async () => {
    const unit = await newUnit();
    const withBase: ArmGeometry = { ...geometry, base: { x: 1800, y: -400, z: 150, rx: 0, ry: 0, rz: 20 } };
    const poses: SessionPose[] = [];
    for (let i = 0; i < 100_000; i++) {
      const q = [((i * 37) % 300) - 150, ((i * 13) % 160) - 100, ((i * 7) % 220) - 90, ((i * 11) % 340) - 170, ((i * 17) % 220) - 110, ((i * 19) % 600) - 300];
      const [x, y, z] = forwardPoint(withBase, q);
      poses.push({ label: `P${i + 1}`, line: i + 2, q, x, y, z });
    }
    const text = sessionToCsv(poses, 6);
    expect(text.length).toBeGreaterThan(4 * 1024 * 1024);
    // Generating the poses takes seconds; touch the server first so the upload does not go out on a
    // keep-alive connection the server is just closing as idle (a client-side EPIPE, not an upload failure).
    // The touch itself may meet that race once (the generation above outlasts the server's keep-alive
    // timeout); a GET is safe to send again.
    await tech.fetch('/api/health').catch(() => tech.fetch('/api/health'));
    const started = performance.now();
    const res = await upload(tech, { unit: unit.serial, file: text, fileName: 'big.csv' });
    // A figure for the report, not a timed assertion.
    console.info(`100 000-pose upload (${(text.length / 1048576).toFixed(1)} MiB): ${Math.round(performance.now() - started)} ms`);
    expect(res.status, JSON.stringify(res.body).slice(0, 500)).toBe(201);
    expect(res.body.poseCount).toBe(100_000);
    const [n] = await db.select({ n: sql<number>`count(*)::int` }).from(sessionPoses).where(eq(sessionPoses.sessionId, res.body.id));
    expect(n!.n).toBe(100_000);
    const last = await tech.json<any>(`/api/sessions/${res.body.id}/poses?page=100&pageSize=1000`);
    expect(last.body.poses.at(-1)).toMatchObject({ idx: 99_999, line: 100_001, label: 'P100000', x: poses[99_999]!.x });
    const file = Buffer.from(await (await tech.fetch(`/api/sessions/${res.body.id}/file`)).arrayBuffer());
    expect(createHash('sha256').update(file).digest('hex')).toBe(createHash('sha256').update(text).digest('hex'));
  });
});

/** A loopback port with nothing listening on it. */
async function deadPort(): Promise<number> {
  return new Promise((resolve) => {
    const srv = net.createServer().listen(0, '127.0.0.1', () => {
      const port = (srv.address() as net.AddressInfo).port;
      srv.close(() => resolve(port));
    });
  });
}

describe('limits and failures on dedicated app instances', () => {
  const started: AppInstance[] = [];
  afterAll(async () => {
    for (const a of started) await a.stop();
  });

  it('a file over MAX_UPLOAD_BYTES is refused with 413, whether or not content-length says so up front', async () => {
    const app = await startAppInstance({ MAX_UPLOAD_BYTES: '4096' });
    started.push(app);
    const client = await signedIn(DEMO.technician, undefined, app.url);
    // 6 KB: passes the declared-length check (form overhead allowed), stopped while streaming.
    const unit = await newUnit();
    const small = await upload(client, { unit: unit.serial, file: goodFile });
    expect(goodFile.length).toBeGreaterThan(4096);
    expect(small.status, JSON.stringify(small.body)).toBe(413);
    expect(small.body.error).toMatch(/larger than the limit of 4 KiB/);
    expect(small.body.errors[0]).toMatchObject({ field: 'file', expected: expect.stringMatching(/at most 4 KiB/) });
    await expectNothingStored(unit);
    // 1 MB: refused from the content-length alone.
    const big = await upload(client, { unit: unit.serial, file: new Uint8Array(1024 * 1024).fill(0x31) });
    expect(big.status).toBe(413);
    expect(big.body.error).toMatch(/largest session file accepted is 4 KiB/);
    await expectNothingStored(unit);
  });

  it('S3 unreachable: a clear 503, no row and no object; the retry succeeds', async () => {
    const app = await startAppInstance({ S3_ENDPOINT: `http://127.0.0.1:${await deadPort()}` });
    started.push(app);
    const client = await signedIn(DEMO.technician, undefined, app.url);
    const unit = await newUnit();
    const failed = await upload(client, { unit: unit.serial, file: goodFile });
    expect(failed.status).toBe(503);
    expect(failed.body.error).toMatch(/file store \(S3\) is not reachable.*no file and no rows were kept.*again/);
    await expectNothingStored(unit);
    const retry = await upload(tech, { unit: unit.serial, file: goodFile });
    expect(retry.status).toBe(201);
    expect(await sessionCount(unit.id)).toBe(1);
    expect(await objectsUnder(unit.serial)).toHaveLength(1);
  });
});
