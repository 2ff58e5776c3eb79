/**
 * Review rules an attacker (or a hurried team) could walk around: four eyes over the whole lineage of refits,
 * the approval order of sessions (an older measurement silently replacing a newer current set), and
 * duplicate fits from simultaneous "run fit" calls.
 */
import { and, eq } from 'drizzle-orm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { auditLog, fits, sessionPoses, sessions } from '../../src/db/schema';
import { DEMO, signedIn, uniq, type Client } from '../support/http';
import { createFixture, testDb, waitForFit, type Fixture } from './fit-fixtures';

let engineer: Client, engineer2: Client, admin: Client;
const GROUPS = ['lengths', 'twists', 'offsets', 'base', 'tool'];

beforeAll(async () => {
  [engineer, engineer2, admin] = await Promise.all([signedIn(DEMO.engineer), signedIn(DEMO.engineer2), signedIn(DEMO.admin)]);
});
afterAll(async () => {
  await testDb().$client.end();
});

const post = (c: Client, id: string, action: string, json: unknown = {}) => c.json(`/api/fits/${id}/${action}`, { method: 'POST', json });

async function run(c: Client, sessionId: string, settings: Record<string, unknown> = {}) {
  const res = await c.json(`/api/sessions/${sessionId}/fits`, { method: 'POST', json: { groups: GROUPS, ...settings } });
  expect(res.status, JSON.stringify(res.body)).toBe(202);
  const { fit } = await waitForFit(c, res.body.id);
  expect(fit.state, fit.error ?? '').toBe('fitted');
  return fit.id as string;
}

async function refitOf(c: Client, parentId: string, json: Record<string, unknown> = {}) {
  const res = await post(c, parentId, 'refit', json);
  expect(res.status, JSON.stringify(res.body)).toBe(202);
  const { fit } = await waitForFit(c, res.body.id);
  expect(fit.state, fit.error ?? '').toBe('fitted');
  return fit.id as string;
}

const auditActions = async (fitId: string) =>
  (await testDb().select({ action: auditLog.action, details: auditLog.details }).from(auditLog).where(and(eq(auditLog.entityType, 'fit'), eq(auditLog.entityId, fitId))));

describe('four eyes over the whole lineage', () => {
  it('whoever ran the fit a refit came from, with exclusions, cannot approve the refit', async () => {
    const fx = await createFixture({ count: 40, seed: 31, outlier: true });
    // Engineer A runs with an exclusion; B refits it unchanged and submits; A must not approve.
    const first = await run(engineer, fx.sessionId, { exclude: ['P007'] });
    const second = await refitOf(engineer2, first);
    expect((await post(engineer2, second, 'submit')).status).toBe(200);
    const res = await post(engineer, second, 'approve');
    expect(res.status, JSON.stringify(res.body)).toBe(403);
    expect(res.body.error).toMatch(/Four-eyes/);
    expect(res.body.error).toMatch(/excluded 1 pose/);
    // The one who refit and submitted cannot either.
    expect((await post(engineer2, second, 'approve')).status).toBe(403);
  });

  it('a chain of refits is followed to its first fit', async () => {
    const fx = await createFixture({ count: 40, seed: 32 });
    const a = await run(engineer, fx.sessionId);
    const b = await refitOf(engineer2, a, { exclude: ['P003'] });
    const c = await refitOf(engineer2, b, { robust: true });
    expect((await post(engineer2, c, 'submit')).status).toBe(200);
    const res = await post(engineer, c, 'approve');
    expect(res.status).toBe(403);
    expect(res.body.error).toMatch(/ran fit/);
  });

  it("the administrators' exception still applies and is recorded in the audit log", async () => {
    const fx = await createFixture({ count: 40, seed: 33 });
    const a = await run(admin, fx.sessionId);
    const b = await refitOf(engineer2, a, { exclude: ['P004'] });
    expect((await post(engineer2, b, 'submit')).status).toBe(200);
    const res = await post(admin, b, 'approve');
    expect(res.status, JSON.stringify(res.body)).toBe(200);
    const entries = await auditActions(b);
    const exception = entries.find((e) => e.action === 'four_eyes.waived');
    expect(exception, JSON.stringify(entries)).toBeDefined();
    expect(JSON.stringify(exception!.details)).toMatch(/ran fit/);
  });
});

/** A second session of the fixture's unit, measured on `measuredOn`, with the same poses. */
async function olderSession(fx: Fixture, measuredOn: string) {
  const db = testDb();
  const [s] = await db.select().from(sessions).where(eq(sessions.id, fx.sessionId));
  const sha = uniq('sha').toLowerCase().padEnd(64, '0');
  const { id: _id, createdAt: _c, ...rest } = s!;
  const [copy] = await db.insert(sessions).values({ ...rest, measuredOn, fileSha256: sha, fileKey: `test/${sha}.csv` }).returning();
  const poses = await db.select().from(sessionPoses).where(eq(sessionPoses.sessionId, fx.sessionId));
  await db.insert(sessionPoses).values(poses.map((p) => ({ ...p, sessionId: copy!.id })));
  return copy!.id;
}

describe('approval order', () => {
  it('refuses to approve a fit of an older session over a newer current set unless confirmed, and records the confirmation', async () => {
    const fx = await createFixture({ count: 40, seed: 34 }); // measured 2026-11-20
    const newer = await run(engineer, fx.sessionId);
    expect((await post(engineer, newer, 'submit')).status).toBe(200);
    expect((await post(engineer2, newer, 'approve')).status).toBe(200);

    const old = await olderSession(fx, '2024-03-05');
    const fitOld = await run(engineer, old);
    expect((await post(engineer, fitOld, 'submit')).status).toBe(200);
    const refused = await post(engineer2, fitOld, 'approve');
    expect(refused.status, JSON.stringify(refused.body)).toBe(409);
    expect(refused.body.error).toMatch(/2024-03-05/);
    expect(refused.body.error).toMatch(/2026-11-20/);
    expect(refused.body.error).toMatch(/confirmOlderSession/);
    const sets = await engineer.json(`/api/units/${fx.serial}/parameter-sets`);
    expect(sets.body.parameterSets.filter((p: { state: string }) => p.state === 'current')).toHaveLength(1);
    expect(sets.body.parameterSets[0].fitId).toBe(newer);

    const confirmed = await post(engineer2, fitOld, 'approve', { confirmOlderSession: true, comment: 'newer set measured with a loose SMR nest' });
    expect(confirmed.status, JSON.stringify(confirmed.body)).toBe(200);
    const entry = (await auditActions(fitOld)).find((e) => e.action === 'older_session.approved');
    expect(entry).toBeDefined();
    expect(entry!.details).toMatchObject({ measuredOn: '2024-03-05', currentMeasuredOn: '2026-11-20' });
  });

  it('a newer session is approved over an older current set without a question', async () => {
    const fx = await createFixture({ count: 40, seed: 35 });
    const old = await olderSession(fx, '2025-01-10');
    const fitOld = await run(engineer, old);
    expect((await post(engineer, fitOld, 'submit')).status).toBe(200);
    expect((await post(engineer2, fitOld, 'approve')).status).toBe(200);
    const fitNew = await run(engineer, fx.sessionId);
    expect((await post(engineer, fitNew, 'submit')).status).toBe(200);
    expect((await post(engineer2, fitNew, 'approve')).status).toBe(200);
  });
});

describe('identical fits', () => {
  it('three simultaneous identical "run fit" calls make one fit', async () => {
    const fx = await createFixture({ count: 40, seed: 36 });
    const body = { groups: GROUPS, seed: 5 };
    // The rule covers fits still queued or running. A 40-pose fit can finish before a late third request
    // reaches the lock, so the test holds the per-session lock itself until all three requests wait on it:
    // then they meet the lock together, as simultaneous requests on a busy server do.
    const conn = await testDb().$client.reserve();
    let answers: { status: number; body: any }[];
    try {
      await conn`select pg_advisory_lock(hashtext(${'fit:' + fx.sessionId}))`;
      const pending = Promise.all([1, 2, 3].map(() => engineer.json(`/api/sessions/${fx.sessionId}/fits`, { method: 'POST', json: body })));
      const deadline = Date.now() + 30_000;
      for (;;) {
        const [{ waiting }] = await conn`select count(*)::int as waiting from pg_locks w join pg_locks h
          on h.locktype = 'advisory' and h.granted and h.pid = pg_backend_pid()
          and w.classid = h.classid and w.objid = h.objid and w.objsubid = h.objsubid
          where w.locktype = 'advisory' and not w.granted`;
        if (waiting >= 3) break;
        if (Date.now() > deadline) throw new Error(`only ${waiting} of 3 requests reached the fit lock within 30 s`);
        await new Promise((r) => setTimeout(r, 20));
      }
      await conn`select pg_advisory_unlock(hashtext(${'fit:' + fx.sessionId}))`;
      answers = await pending;
    } finally {
      conn.release();
    }
    const ids = new Set(answers.map((a) => a.body.id));
    expect(ids.size, JSON.stringify(answers.map((a) => [a.status, a.body]))).toBe(1);
    expect(answers.filter((a) => a.status === 202)).toHaveLength(1);
    expect(answers.filter((a) => a.status === 200 && a.body.existing === true)).toHaveLength(2);
    const rows = await testDb().select({ id: fits.id }).from(fits).where(eq(fits.sessionId, fx.sessionId));
    expect(rows).toHaveLength(1);
    // Different settings are a different fit.
    const other = await engineer.json(`/api/sessions/${fx.sessionId}/fits`, { method: 'POST', json: { ...body, seed: 6 } });
    expect(other.status).toBe(202);
    expect(other.body.id).not.toBe([...ids][0]);
  });
});
