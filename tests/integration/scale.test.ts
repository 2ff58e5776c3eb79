/**
 * Scale: a 100 000-pose session uploaded, fitted and shown. Asserts the structural bounds (not times: the
 * times are in `npm run bench -- scale`): the fit summary API under 200 kB, the fit and session pages under
 * 2 MB of HTML, the per-pose part paged and streamed from its own endpoint, the largest residuals kept in
 * the decimated chart series, every row stored exactly once in file order.
 */
import { parse } from 'csv-parse/sync';
import { asc, count, eq } from 'drizzle-orm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { bumpedPositions, scaleNominal, scaleSessionCsv } from '../../scripts/scale-fixture';
import { armModelRevisions, armModels, fitPoses, sessionPoses, sessions, units } from '../../src/db/schema';
import { chartPoses } from '../../src/lib/shared/fit-summary';
import { DEMO, signedIn, uniq, type Client } from '../support/http';
import { testDb, waitForFit } from './fit-fixtures';

const N = 100_000;
const db = testDb();
let engineer: Client;
let csv: string;
let sessionId: string;
let fitId: string;
const bumped = bumpedPositions(N);
const label = (i: number) => `P${String(i + 1).padStart(6, '0')}`;

beforeAll(async () => {
  engineer = await signedIn(DEMO.engineer);
  const [model] = await db.insert(armModels).values({ name: `Tarn R6-420 scale ${uniq()}`, manufacturer: 'Invented Arms Co.' }).returning();
  const [rev] = await db.insert(armModelRevisions).values({ modelId: model!.id, revision: 1, geometry: scaleNominal() }).returning();
  const serial = `SC-${uniq()}`;
  await db.insert(units).values({ serial, modelRevisionId: rev!.id, site: 'Test hall', cell: 'C1' });
  csv = scaleSessionCsv(N);
  const form = new FormData();
  for (const [k, v] of Object.entries({ unit: serial, measuredOn: '2026-11-30', technician: 'Test Tech', instrument: 'tracker T-1', ambientC: '21', target: '1.5 in SMR', notes: '' })) form.append(k, v);
  form.append('file', new Blob([csv], { type: 'text/csv' }), 'continuous.csv');
  const up = await engineer.json('/api/sessions', { method: 'POST', body: form });
  expect(up.status, JSON.stringify(up.body).slice(0, 500)).toBe(201);
  sessionId = up.body.id;
  const res = await engineer.json(`/api/sessions/${sessionId}/fits`, { method: 'POST', json: {} });
  expect(res.status).toBe(202);
  fitId = res.body.id;
  const done = await waitForFit(engineer, fitId, 240_000);
  expect(done.fit.state, done.fit.error ?? '').toBe('fitted');
}, 400_000);
afterAll(async () => {
  await db.$client.end();
});

describe('a 100 000-pose session', () => {
  it('stores every row once, in file order, at full precision', async () => {
    const [s] = await db.select({ poseCount: sessions.poseCount }).from(sessions).where(eq(sessions.id, sessionId));
    expect(s!.poseCount).toBe(N);
    const [{ n } = { n: 0 }] = await db.select({ n: count() }).from(sessionPoses).where(eq(sessionPoses.sessionId, sessionId));
    expect(n).toBe(N);
    const sample = await db.select().from(sessionPoses).where(eq(sessionPoses.sessionId, sessionId)).orderBy(asc(sessionPoses.idx)).limit(3).offset(N - 3);
    const fileRows = csv.trim().split('\n').slice(-3).map((l) => l.split(','));
    sample.forEach((row, k) => {
      const f = fileRows[k]!;
      expect(row.idx).toBe(N - 3 + k);
      expect(row.line).toBe(N - 3 + k + 2);
      expect(row.label).toBe(f[0]);
      expect(row.q).toEqual(f.slice(1, 7).map(Number));
      expect([row.x, row.y, row.z]).toEqual(f.slice(7, 10).map(Number));
    });
  });

  it('serves the fit summary under 200 kB, without the per-pose list, its chart keeping the largest residuals', async () => {
    const res = await engineer.fetch(`/api/fits/${fitId}`);
    const text = await res.text();
    expect(res.status).toBe(200);
    console.log(`scale: GET /api/fits/{id} ${Buffer.byteLength(text)} bytes at ${N} poses`);
    expect(Buffer.byteLength(text)).toBeLessThan(200_000);
    const report = JSON.parse(text).fit.report;
    expect(report).not.toHaveProperty('poses');
    expect(report.poseSummary.count).toBe(N);
    const drawn = chartPoses(report.poseSummary.chart);
    expect(drawn.length).toBeLessThanOrEqual(1500);
    const labels = new Set(drawn.map((p) => p.label));
    for (const b of bumped) expect(labels.has(label(b)), label(b)).toBe(true);
    // The 300 largest residuals after calibration (from the stored per-pose rows) are all drawn.
    const worst = await db.select({ label: fitPoses.label }).from(fitPoses).where(eq(fitPoses.fitId, fitId)).orderBy(asc(fitPoses.errorAfter)).offset(N - 300);
    for (const w of worst) expect(labels.has(w.label), w.label).toBe(true);
  });

  it('keeps the fit page and the session page under 2 MB of HTML', async () => {
    for (const path of [`/fits/${fitId}`, `/sessions/${sessionId}`]) {
      const res = await engineer.fetch(path);
      const html = await res.text();
      expect(res.status, path).toBe(200);
      console.log(`scale: ${path.split('/')[1]} page ${Buffer.byteLength(html)} bytes at ${N} poses`);
      expect(Buffer.byteLength(html), path).toBeLessThan(2_000_000);
    }
  });

  it('pages the per-pose residuals from their own endpoint', async () => {
    const p2 = await engineer.json(`/api/fits/${fitId}/poses?page=2&pageSize=1000`);
    expect(p2.status).toBe(200);
    expect(p2.body.total).toBe(N);
    expect(p2.body.poses).toHaveLength(1000);
    expect(p2.body.poses[0]).toMatchObject({ order: 1001, label: label(1000), line: 1002 });
    expect(p2.body.poses[999].order).toBe(2000);
    const last = await engineer.json(`/api/fits/${fitId}/poses?page=100&pageSize=1000`);
    expect(last.body.poses.at(-1).order).toBe(N);
    const past = await engineer.json(`/api/fits/${fitId}/poses?page=101&pageSize=1000`);
    expect(past.body.poses).toEqual([]);
    const largest = await engineer.json(`/api/fits/${fitId}/poses?order=largest&pageSize=3`);
    expect(largest.body.poses.map((p: { label: string }) => p.label).sort()).toEqual(bumped.map(label).sort());
    expect(largest.body.poses[0].errorAfter).toBeGreaterThan(1);
    const tooBig = await engineer.json(`/api/fits/${fitId}/poses?pageSize=1001`);
    expect(tooBig.status).toBe(400);
    expect(tooBig.body.errors[0].field).toBe('pageSize');
    const none = await engineer.json(`/api/fits/00000000-0000-4000-8000-000000000000/poses`);
    expect(none.status).toBe(404);
    const sessionPage = await engineer.json(`/api/sessions/${sessionId}/poses?page=100&pageSize=1000`);
    expect(sessionPage.body.poses).toHaveLength(1000);
    expect(sessionPage.body.poses.at(-1).label).toBe(label(N - 1));
    // The session check answers its statistics over every pose and one page of the poses' errors.
    const check = await engineer.fetch(`/api/sessions/${sessionId}/check?order=largest&pageSize=3`);
    const checkText = await check.text();
    console.log(`scale: GET /api/sessions/{id}/check ${Buffer.byteLength(checkText)} bytes at ${N} poses`);
    expect(Buffer.byteLength(checkText)).toBeLessThan(200_000);
    const checked = JSON.parse(checkText);
    expect(checked.check.stats.n).toBe(N);
    expect(checked.check.posePage).toEqual({ page: 1, pageSize: 3, total: N, order: 'largest' });
    expect(checked.check.poses.map((p: { label: string }) => p.label).sort()).toEqual(bumped.map(label).sort());
    const defaultPage = await engineer.fetch(`/api/sessions/${sessionId}/check`);
    expect(Buffer.byteLength(await defaultPage.text())).toBeLessThan(200_000);
  });

  it('streams every pose as CSV, read back with csv-parse', async () => {
    const res = await engineer.fetch(`/api/fits/${fitId}/poses?format=csv`);
    expect(res.status).toBe(200);
    expect(res.headers.get('content-type')).toContain('text/csv');
    const rows = parse(await res.text(), { columns: true }) as Record<string, string>[];
    expect(rows).toHaveLength(N);
    expect(rows[0]).toMatchObject({ pose: label(0), line: '2', order: '1' });
    const b = rows[bumped[1]!]!;
    expect(b.pose).toBe(label(bumped[1]!));
    expect(Number(b.after_mm)).toBeGreaterThan(1);
    expect(Number(rows[N - 1]!.order)).toBe(N);
  });
});
