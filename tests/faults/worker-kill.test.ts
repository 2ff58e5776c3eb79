/**
 * A worker process killed (SIGKILL) in the middle of a fit: its pg-boss job stays active until it expires,
 * the queue's maintenance fails it into a retry, another worker takes it and runs the fit from scratch. The
 * fit ends fitted exactly once: attempts = 2, one fit.fitted audit entry, one completed job with one retry.
 *
 * The fit is long for real (20 000 invented poses, 10-fold cross-validation, robust loss: several seconds),
 * not slowed down artificially. The queue's job expiry is shortened to 20 s for this test through the
 * FIT_JOB_* settings of src/lib/server/jobs.ts, and put back to the default afterwards.
 */
import { eq } from 'drizzle-orm';
import PgBoss from 'pg-boss';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { armModelRevisions, armModels, auditLog, sessionPoses, sessions, units } from '../../src/db/schema';
import { forwardPoint } from '../../src/lib/engine/kinematics';
import { DEMO, signedIn, uniq, type Client } from '../support/http';
import { startAppInstance, startWorker, type AppInstance } from '../support/services';
import { poll } from '../support/wait';
import { nominalTq6, trueTq6 } from '../support/arms';
import { testDb } from '../integration/fit-fixtures';

const POSES = 20_000;
const QUICK_QUEUE = { FIT_JOB_EXPIRE_SECONDS: '20', FIT_JOB_MAINTENANCE_SECONDS: '2', FIT_JOB_RETRY_DELAY_SECONDS: '1', FIT_JOB_POLL_SECONDS: '0.5' };
const started: AppInstance[] = [];

/** A unit with one session of POSES poses predicted by the invented "true" Tarn R6-420 plus tracker-like noise. */
async function bigSession(): Promise<{ unitId: string; sessionId: string }> {
  const db = testDb();
  const nominal = nominalTq6();
  const truth = trueTq6();
  let s = 20261201;
  // Park–Miller minimal standard generator (public domain), seeded for a reproducible session.
  const r = () => ((s = (s * 16807) % 2147483647) / 2147483647);
  const [model] = await db.insert(armModels).values({ name: `Tarn R6-420 ${uniq()}`, manufacturer: 'Invented Arms Co.' }).returning();
  const [rev] = await db.insert(armModelRevisions).values({ modelId: model!.id, revision: 1, geometry: nominal }).returning();
  const [unit] = await db.insert(units).values({ serial: `TQ6-${uniq()}`, modelRevisionId: rev!.id, site: 'Test hall' }).returning();
  const [session] = await db
    .insert(sessions)
    .values({
      unitId: unit!.id, modelRevisionId: rev!.id, measuredOn: '2026-11-24', technician: 'Test technician', instrument: 'Invented tracker T-1',
      fileName: 'long.csv', fileKey: `test/${unit!.serial}/long.csv`, fileSha256: uniq('sha-').padEnd(64, '0').slice(0, 64), fileBytes: POSES * 80,
      poseCount: POSES, jointCount: 6, hasSplit: false,
    })
    .returning();
  const rows = Array.from({ length: POSES }, (_, i) => {
    const q = nominal.joints.map((j) => j.min! * 0.8 + (j.max! - j.min!) * 0.8 * r());
    const p = forwardPoint(truth, q);
    return { sessionId: session!.id, idx: i, line: i + 2, label: `P${i + 1}`, q, x: p[0] + (r() - 0.5) * 0.03, y: p[1] + (r() - 0.5) * 0.03, z: p[2] + (r() - 0.5) * 0.03 };
  });
  for (let k = 0; k < rows.length; k += 2000) await db.insert(sessionPoses).values(rows.slice(k, k + 2000));
  return { unitId: unit!.id, sessionId: session!.id };
}

let app: AppInstance;
let engineer: Client;
let big: { unitId: string; sessionId: string };

beforeAll(async () => {
  big = await bigSession();
  // Submitted through an instance without a worker, with the short expiry: its first send sets the queue's policy.
  app = await startAppInstance({ ...QUICK_QUEUE, RUN_WORKER: 'false' });
  started.push(app);
  engineer = await signedIn(DEMO.engineer, undefined, app.url);
}, 120_000);

afterAll(async () => {
  for (const p of started.reverse()) await p.stop('SIGTERM').catch(() => undefined);
  // Put the queue back to the production expiry (jobs.ts default), so later fits are not cut short.
  const boss = new PgBoss({ connectionString: process.env.DATABASE_URL!, supervise: false, schedule: false, migrate: false, max: 1 });
  await boss.start();
  await boss.updateQueue('fit', { name: 'fit', policy: 'stately', retryLimit: 3, retryDelay: 2, expireInSeconds: 15 * 60 });
  await boss.stop({ graceful: false, wait: true, close: true });
  await testDb().$client.end();
}, 60_000);

describe('a worker killed mid-fit', () => {
  it('leaves a job that another worker retries; the fit finishes once with attempts = 2', async () => {
    const sql = testDb().$client;
    // Many polling slots on the victim, so it (not the main app's worker) most likely takes the job; if
    // another worker takes it, that fit is let finish and a new one is tried (at most 4 times).
    const victim = await startWorker({ name: 'kill-victim', concurrency: 8, env: QUICK_QUEUE, started });
    let fitId = '';
    let claimedAt = 0;
    for (let tryNo = 0; tryNo < 4 && !fitId; tryNo++) {
      const res = await engineer.json(`/api/sessions/${big.sessionId}/fits`, { method: 'POST', json: { kFold: 10, robust: true, holdout: 0.2, seed: tryNo + 1 } });
      expect(res.status, JSON.stringify(res.body)).toBe(202);
      // Until a worker has claimed it (or it is already over).
      const { value: row } = await poll(
        async () => (await sql<{ state: string; worker: string | null; attempts: number }[]>`select state, progress->>'worker' as worker, attempts from fits where id = ${res.body.id}`)[0]!,
        (r) => (r.state === 'running' && !!r.worker) || r.state === 'fitted' || r.state === 'failed',
        { timeoutMs: 60_000, intervalMs: 50 },
      );
      if (row.state === 'running' && row.worker === 'kill-victim') {
        fitId = res.body.id;
        claimedAt = Date.now();
      }
    }
    expect(fitId, 'the victim worker never took one of the fits').not.toBe('');

    // Mid-fit: iterations are being written by the victim.
    const [mid] = await sql<{ state: string; attempts: number; iteration: number }[]>`select state, attempts, (progress->>'iteration')::int as iteration from fits where id = ${fitId}`;
    expect(mid).toMatchObject({ state: 'running', attempts: 1 });
    const killed = await victim.stop('SIGKILL');
    expect(killed).toMatchObject({ stopped: true, signal: 'SIGKILL' });
    const [orphan] = await sql<{ state: string }[]>`select state from pgboss.job where name = 'fit' and singleton_key = ${fitId}`;
    expect(orphan!.state).toBe('active');
    // The rescuer starts after the kill, so nothing but the expired job can bring the fit to it or the main app.
    await startWorker({ name: 'kill-rescuer', concurrency: 1, env: QUICK_QUEUE, started });

    const { value: fit } = await poll(
      async () => (await sql<{ state: string; attempts: number; worker: string | null; has_report: boolean }[]>`
        select state, attempts, progress->>'worker' as worker, report is not null as has_report from fits where id = ${fitId}`)[0]!,
      (f) => f.state === 'fitted' || f.state === 'failed',
      { timeoutMs: 90_000 },
    );
    console.log(`[worker-kill] fit ${fitId}: ${fit.state} after ${((Date.now() - claimedAt) / 1000).toFixed(1)} s from the victim's claim, by ${fit.worker}`);
    expect(fit).toMatchObject({ state: 'fitted', attempts: 2, has_report: true });
    expect(fit.worker).not.toBe('kill-victim');

    // One parameter report: one fit.fitted entry, from the second attempt.
    const entries = await testDb().select().from(auditLog).where(eq(auditLog.entityId, fitId));
    expect(entries.map((e) => e.action).sort()).toEqual(['fit.created', 'fit.fitted']);
    expect(entries.find((e) => e.action === 'fit.fitted')!.details).toMatchObject({ attempt: 2, worker: fit.worker });
    // The job: failed once by its expiry, retried, completed with the fit.
    const jobs = await sql<{ state: string; retry_count: number; outcome: string | null }[]>`
      select state, retry_count, output->>'outcome' as outcome from pgboss.job where name = 'fit' and singleton_key = ${fitId}
      union all select state, retry_count, output->>'outcome' from pgboss.archive where name = 'fit' and singleton_key = ${fitId}`;
    expect(jobs).toEqual([{ state: 'completed', retry_count: 1, outcome: 'fitted' }]);
    // Through the API the fit is complete.
    const res = await engineer.json(`/api/fits/${fitId}`);
    expect(res.body.fit).toMatchObject({ state: 'fitted', attempts: 2 });
    expect(res.body.fit.report.poseSummary.count).toBe(POSES);
    const page = await engineer.json(`/api/fits/${fitId}/poses?pageSize=1000`);
    expect(page.body.total).toBe(POSES);
    expect(page.body.poses).toHaveLength(Math.min(POSES, 1000));
    // The last page ends with the last pose: every per-pose result was stored once.
    const last = await engineer.json(`/api/fits/${fitId}/poses?pageSize=1000&page=${Math.ceil(POSES / 1000)}`);
    expect(last.body.poses.at(-1).order).toBe(POSES);
  }, 300_000);
});
