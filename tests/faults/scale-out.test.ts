/**
 * Scale-out: two more app instances (RUN_WORKER=false, so they only take requests) on their own ports and
 * two separate worker processes (scripts/worker.ts), all on the run's PostgreSQL and S3. 50 fits are
 * submitted through the two instances in turn; every one is fitted exactly once — one completed pg-boss
 * job, attempts = 1, one fit.fitted audit entry, one report — and both worker processes did some of them.
 * The harness's main app keeps its own worker (RUN_WORKER=true), so three processes share the queue.
 * One instance is stopped half-way and started again: the statuses read through it are unchanged.
 *
 * In tests/faults because it starts and stops processes of its own for a minute or more.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { DEMO, signedIn, type Client } from '../support/http';
import { startAppInstance, startWorker, type AppInstance } from '../support/services';
import { waitUntil } from '../support/wait';
import { createFixture, testDb, type Fixture } from '../integration/fit-fixtures';

const FITS = 50;
const SESSIONS = 10;
const started: AppInstance[] = [];

async function startInstance(): Promise<AppInstance> {
  const app = await startAppInstance({ RUN_WORKER: 'false' });
  started.push(app);
  return app;
}

interface FitRow {
  id: string;
  state: string;
  attempts: number;
  started_at: Date | string | null;
  finished_at: Date | string | null;
  has_report: boolean;
}

/** The raw client may hand timestamps over as text. */
const time = (v: Date | string | null) => (v === null ? NaN : new Date(v).getTime());

async function fitRows(ids: string[]): Promise<Map<string, FitRow>> {
  const rows = await testDb().$client<FitRow[]>`
    select id, state, attempts, started_at, finished_at, report is not null as has_report from fits where id = any(${ids}::uuid[])`;
  return new Map(rows.map((r) => [r.id, r]));
}

let fixtures: Fixture[];
let a: AppInstance, b: AppInstance;
let clientA: Client, clientB: Client;
let w1: AppInstance, w2: AppInstance;

beforeAll(async () => {
  fixtures = [];
  for (let i = 0; i < SESSIONS; i++) fixtures.push(await createFixture({ count: 36, seed: 100 + i }));
  [a, b, w1, w2] = await Promise.all([startInstance(), startInstance(), startWorker({ name: 'scale-w1', concurrency: 2, started }), startWorker({ name: 'scale-w2', concurrency: 2, started })]);
  [clientA, clientB] = await Promise.all([signedIn(DEMO.engineer, undefined, a.url), signedIn(DEMO.engineer, undefined, b.url)]);
}, 120_000);

afterAll(async () => {
  // Workers first and gently (SIGTERM lets a running fit finish or hand its job back), then the instances.
  for (const p of started.reverse()) await p.stop('SIGTERM').catch(() => undefined);
  await testDb().$client.end();
}, 60_000);

describe('two app instances and two worker processes', () => {
  it('run 50 fits submitted through both instances, each exactly once, and statuses survive an instance restart', async () => {
    const ids: string[] = [];
    for (let i = 0; i < FITS; i++) {
      const client = i % 2 === 0 ? clientA : clientB;
      const fx = fixtures[i % SESSIONS]!;
      // Different settings per fit, so no two fits of a session are the same computation.
      const res = await client.json(`/api/sessions/${fx.sessionId}/fits`, { method: 'POST', json: { groups: ['lengths', 'offsets', 'base', 'tool'], seed: i + 1 } });
      expect(res.status, JSON.stringify(res.body)).toBe(202);
      ids.push(res.body.id);
    }
    expect(new Set(ids).size).toBe(FITS);

    // Half-way: stop instance B, read every status through A, start B again, compare.
    await waitUntil('10 fits fitted', async () => [...(await fitRows(ids)).values()].filter((r) => r.state === 'fitted').length >= 10, Boolean, { timeoutMs: 120_000 });
    const before = await fitRows(ids);
    const fittedBefore = [...before.values()].filter((r) => r.state === 'fitted');
    const stopped = await b.stop('SIGTERM');
    expect(stopped).toMatchObject({ stopped: true });
    expect((await clientA.json(`/api/fits/${ids[1]}`)).status).toBe(200);
    const b2 = await startInstance();
    const clientB2 = await signedIn(DEMO.engineer, undefined, b2.url);
    for (const row of fittedBefore) {
      const res = await clientB2.json(`/api/fits/${row.id}`);
      expect(res.status).toBe(200);
      expect(res.body.fit).toMatchObject({ state: 'fitted', attempts: 1 });
      expect(new Date(res.body.fit.finishedAt).getTime()).toBe(time(row.finished_at));
    }

    await waitUntil(`all ${FITS} fits finished`, async () => [...(await fitRows(ids)).values()].every((r) => r.state === 'fitted' || r.state === 'failed'), Boolean, { timeoutMs: 240_000 });
    const rows = await fitRows(ids);
    for (const id of ids) {
      const r = rows.get(id)!;
      expect(r.state, id).toBe('fitted');
      expect(r.attempts, id).toBe(1);
      expect(r.has_report, id).toBe(true);
      expect(time(r.finished_at)).toBeGreaterThanOrEqual(time(r.started_at));
    }

    // Exactly one completed job per fit (live table and archive), each reporting the fit it made.
    const sql = testDb().$client;
    const jobs = await sql<{ key: string; state: string; outcome: string | null; retry_count: number }[]>`
      select singleton_key as key, state, output->>'outcome' as outcome, retry_count from pgboss.job where name = 'fit' and singleton_key = any(${ids})
      union all
      select singleton_key, state, output->>'outcome', retry_count from pgboss.archive where name = 'fit' and singleton_key = any(${ids})`;
    for (const id of ids) {
      const mine = jobs.filter((j) => j.key === id);
      expect(mine, `jobs of fit ${id}`).toEqual([{ key: id, state: 'completed', outcome: 'fitted', retry_count: 0 }]);
    }

    // One run per fit in the audit log, and who ran it.
    const audits = await sql<{ entity_id: string; worker: string | null; attempt: number }[]>`
      select entity_id, details->>'worker' as worker, (details->>'attempt')::int as attempt from audit_log
      where action = 'fit.fitted' and entity_id = any(${ids}::uuid[])`;
    expect(audits).toHaveLength(FITS);
    expect(new Set(audits.map((x) => x.entity_id)).size).toBe(FITS);
    expect(audits.every((x) => x.attempt === 1)).toBe(true);
    const byWorker = new Map<string, number>();
    for (const x of audits) byWorker.set(x.worker ?? '(none)', (byWorker.get(x.worker ?? '(none)') ?? 0) + 1);
    console.log(`[scale-out] fits per worker: ${[...byWorker].map(([w, n]) => `${w} ${n}`).join(', ')}`);
    expect(byWorker.get('scale-w1') ?? 0).toBeGreaterThan(0);
    expect(byWorker.get('scale-w2') ?? 0).toBeGreaterThan(0);

    // Each fit's report is there through the API, from either instance.
    for (const [k, id] of ids.entries()) {
      const res = await (k % 2 === 0 ? clientA : clientB2).json(`/api/fits/${id}`);
      expect(res.status).toBe(200);
      expect(res.body.fit.report.parameters.length).toBeGreaterThan(0);
      expect(res.body.fit.progress.worker).toBe(audits.find((x) => x.entity_id === id)!.worker);
    }

    // The worker processes stop cleanly.
    for (const w of [w1, w2]) expect(await w.stop('SIGTERM')).toMatchObject({ stopped: true, code: 0 });
  }, 420_000);
});
