/**
 * The session page's checks are computed once and kept (session_digests): warmed after the upload, the same
 * numbers as the full check of the API, a chart sample that keeps the largest nominal errors, and
 * recomputed when the model's judgement settings change.
 */
import { eq } from 'drizzle-orm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { scaleNominal, scaleSessionCsv } from '../../scripts/scale-fixture';
import { armModelRevisions, armModels, sessionDigests, units } from '../../src/db/schema';
import { SESSION_SAMPLE_LIMIT } from '../../src/lib/server/session-checks';
import type { SessionDigest } from '../../src/lib/server/session-digest-task';
import { DEMO, signedIn, uniq, type Client } from '../support/http';
import { waitUntil } from '../support/wait';
import { testDb } from './fit-fixtures';

const N = 4_000;
const db = testDb();
let engineer: Client;
let sessionId: string;
let modelId: string;

const kept = async () => (await db.select().from(sessionDigests).where(eq(sessionDigests.sessionId, sessionId)))[0];

beforeAll(async () => {
  engineer = await signedIn(DEMO.engineer);
  const [model] = await db.insert(armModels).values({ name: `Tarn R6-420 digest ${uniq()}`, manufacturer: 'Invented Arms Co.' }).returning();
  modelId = model!.id;
  const [rev] = await db.insert(armModelRevisions).values({ modelId, revision: 1, geometry: scaleNominal() }).returning();
  const serial = `DG-${uniq()}`;
  await db.insert(units).values({ serial, modelRevisionId: rev!.id, site: 'Test hall', cell: 'C2' });
  const form = new FormData();
  for (const [k, v] of Object.entries({ unit: serial, measuredOn: '2026-11-30', technician: 'Test Tech', instrument: 'tracker T-1' })) form.append(k, v);
  form.append('file', new Blob([scaleSessionCsv(N)], { type: 'text/csv' }), 'digest.csv');
  const up = await engineer.json('/api/sessions', { method: 'POST', body: form });
  expect(up.status, JSON.stringify(up.body).slice(0, 500)).toBe(201);
  sessionId = up.body.id;
}, 120_000);
afterAll(async () => {
  await db.$client.end();
});

describe('the session digest', () => {
  it('is computed after the upload without anyone opening the page', async () => {
    const row = await waitUntil('digest kept after upload', kept, (r) => r !== undefined, { timeoutMs: 60_000 });
    expect((row!.body as SessionDigest).poseCount).toBe(N);
  });

  it('agrees with the full check and keeps the largest nominal errors in its sample', async () => {
    const body = (await kept())!.body as SessionDigest;
    const full = (await engineer.json<any>(`/api/sessions/${sessionId}/check?pageSize=1000`)).body;
    // Every pose's error, read a page of 1 000 at a time (the API's largest page).
    expect(full.check.posePage).toEqual({ page: 1, pageSize: 1000, total: N, order: 'file' });
    const allPoses: { line: number; error: number }[] = [...full.check.poses];
    for (let page = 2; allPoses.length < N; page++) allPoses.push(...(await engineer.json<any>(`/api/sessions/${sessionId}/check?pageSize=1000&page=${page}`)).body.check.poses);
    expect(allPoses).toHaveLength(N);
    expect(new Set(allPoses.map((p) => p.line)).size).toBe(N);
    expect(body.check.stats).toEqual(full.check.stats);
    expect(body.check.registered).toBe(full.check.registered);
    expect(body.check.verdicts!.level).toBe(full.check.verdicts.level);
    expect(body.quality.identifiable).toBe(full.quality.identifiable);
    expect(body.sample.length).toBeLessThanOrEqual(SESSION_SAMPLE_LIMIT);
    expect(body.sample.length).toBeGreaterThan(SESSION_SAMPLE_LIMIT / 2);
    const byLine = new Map(allPoses.map((p) => [p.line, p.error]));
    for (const p of body.sample) expect(p.error).toBeCloseTo(byLine.get(p.line) as number, 9);
    const largest = [...allPoses].sort((a, b) => b.error - a.error || a.line - b.line).slice(0, 50);
    // order=largest serves the same 50 first.
    const worst = (await engineer.json<any>(`/api/sessions/${sessionId}/check?order=largest&pageSize=50`)).body.check.poses;
    expect(worst.map((p: { line: number }) => p.line)).toEqual(largest.map((p) => p.line));
    const inSample = new Set(body.sample.map((p) => p.line));
    for (const p of largest) expect(inSample.has(p.line), `line ${p.line}`).toBe(true);
    // File order is kept.
    expect(body.sample.map((p) => p.k)).toEqual([...body.sample.map((p) => p.k)].sort((a, b) => a - b));
  });

  it('is what the page shows', async () => {
    const body = (await kept())!.body as SessionDigest;
    const html = await (await engineer.fetch(`/sessions/${sessionId}`)).text();
    expect(html).toContain(`data-rms>${body.check.stats.rms.toFixed(3)}<`);
  });

  it('is recomputed when the model judgement settings change', async () => {
    const before = (await kept())!;
    const tight = { lengthBoundMm: 0.5, angleBoundDeg: 0.05, instrumentNoiseMm: 0.004, toolFixture: false };
    expect((await engineer.json(`/api/arm-models/${modelId}/judgement`, { method: 'PUT', json: tight })).status).toBe(200);
    expect((await engineer.fetch(`/sessions/${sessionId}`)).status).toBe(200);
    const after = (await kept())!;
    expect(after.key).not.toBe(before.key);
    const full = (await engineer.json<any>(`/api/sessions/${sessionId}/check`)).body;
    const limit = (v: { verdicts: { rule: string; limit?: number }[] }) => v.verdicts.find((x) => x.rule === 'nominal-error')?.limit;
    expect(limit((after.body as SessionDigest).check.verdicts!)).toBeCloseTo(limit(full.check.verdicts)!, 12);
    expect(limit((after.body as SessionDigest).check.verdicts!)).not.toBeCloseTo(limit((before.body as SessionDigest).check.verdicts!)!, 6);
  });
});
