/**
 * Signed webhooks end to end, with receivers on loopback only: an approval through the API reaches a
 * subscribed receiver with a signature the README's recipe verifies; a receiver that was down gets the
 * delivery on a retry (the job queue's backoff); a removed endpoint gets nothing; the log shows attempts.
 */
import { createHmac, timingSafeEqual } from 'node:crypto';
import { createServer, type IncomingMessage, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { approveSet, fitAwaitingReview, makeModel, makeUnit, moved } from '../support/approved-sets';
import { webhookDeliveries } from '../../src/db/schema';
import { DEMO, signedIn, type Client } from '../support/http';
import { createFixture, testDb, waitForFit } from './fit-fixtures';
import { sleep, waitUntil } from '../support/wait';

interface Received {
  headers: IncomingMessage['headers'];
  body: string;
}

/** A receiver on 127.0.0.1 that records what it gets and answers `status`. */
async function receiver(port = 0, status = 204) {
  const got: Received[] = [];
  const server: Server = createServer((req, res) => {
    const chunks: Buffer[] = [];
    req.on('data', (c: Buffer) => chunks.push(c));
    req.on('end', () => {
      got.push({ headers: req.headers, body: Buffer.concat(chunks).toString('utf8') });
      res.statusCode = status;
      res.end();
    });
  });
  await new Promise<void>((resolve) => server.listen(port, '127.0.0.1', resolve));
  const address = server.address() as AddressInfo;
  return { got, url: `http://127.0.0.1:${address.port}/hook`, port: address.port, close: () => new Promise<void>((r) => server.close(() => r())) };
}

/** The README's verification recipe, written here independently of the server's code. */
function verify(secret: string, r: Received, toleranceSeconds = 300): boolean {
  const timestamp = String(r.headers['offsetry-webhook-timestamp'] ?? '');
  const signature = String(r.headers['offsetry-webhook-signature'] ?? '');
  if (!/^\d+$/.test(timestamp) || Math.abs(Date.now() / 1000 - Number(timestamp)) > toleranceSeconds) return false;
  const expected = Buffer.from('v1=' + createHmac('sha256', secret).update(`${timestamp}.${r.body}`).digest('hex'));
  const given = Buffer.from(signature);
  return given.length === expected.length && timingSafeEqual(given, expected);
}

/** Ask `probe` until it gives something (not undefined, not false). */
const until = <T>(what: string, probe: () => Promise<T | undefined> | T | undefined, timeoutMs = 60_000): Promise<T> =>
  waitUntil(what, probe, (v) => v !== undefined && v !== false, { timeoutMs, intervalMs: 200 }) as Promise<T>;

let admin: Client, engineer: Client;
const registered: string[] = [];

async function register(url: string, events: string[]) {
  const res = await admin.json('/api/admin/webhooks', { method: 'POST', json: { url, events, description: 'webhook test' } });
  expect(res.status, JSON.stringify(res.body)).toBe(201);
  registered.push(res.body.endpoint.id);
  return res.body as { endpoint: { id: string }; secret: string };
}

async function deliveries(endpointId: string) {
  const res = await admin.json(`/api/admin/webhooks/deliveries?endpoint=${endpointId}`);
  expect(res.status).toBe(200);
  return res.body.deliveries as { id: string; event: string; state: string; attempts: number; lastError: string | null; lastStatus: number | null }[];
}

/** A unit with an approved v1 and a fit awaiting review whose approval (by the engineer) makes v2. */
async function unitReadyForApproval(change: Record<string, number> = {}) {
  const db = testDb();
  const model = await makeModel(db);
  const unit = await makeUnit(db, model.revisionId);
  await approveSet(db, { unitId: unit.unitId, revisionId: model.revisionId, geometry: model.nominal });
  const { fitId } = await fitAwaitingReview(db, { unitId: unit.unitId, revisionId: model.revisionId, geometry: moved(model.nominal, change) });
  return { ...unit, fitId };
}

const forUnit = (got: Received[], serial: string, type?: string) =>
  got.filter((r) => {
    const body = JSON.parse(r.body);
    return body.data?.unit?.serial === serial && (!type || body.type === type);
  });

beforeAll(async () => {
  [admin, engineer] = await Promise.all([signedIn(DEMO.admin), signedIn(DEMO.engineer)]);
});
afterAll(async () => {
  // Other files approve sets too: leave no endpoint behind that would keep receiving them.
  for (const id of registered) await admin.json(`/api/admin/webhooks/${id}`, { method: 'DELETE' });
  await testDb().$client.end();
});

describe('webhook endpoints', () => {
  it('refuses a bad registration with every problem named, and only admins may register', async () => {
    const res = await admin.json('/api/admin/webhooks', { method: 'POST', json: { url: 'ftp://example.invalid/x', events: ['set.approved', 'fit.finished', 'fit.finished'] } });
    expect(res.status).toBe(400);
    const fields = res.body.errors.map((e: { field: string }) => e.field);
    expect(fields).toEqual(expect.arrayContaining(['url', 'events.0']));
    expect((await engineer.json('/api/admin/webhooks', { method: 'POST', json: { url: 'http://127.0.0.1:9/x', events: ['fit.finished'] } })).status).toBe(403);
    expect((await engineer.json('/api/admin/webhooks/deliveries')).status).toBe(403);
  });
});

describe('deliveries', () => {
  it('posts a signed message on approval, and on the drift alert it raises', async () => {
    const r = await receiver();
    try {
      const { endpoint, secret } = await register(r.url, ['parameter_set.approved', 'drift_alert.raised']);
      expect(secret).toMatch(/^whsec_/);
      const u = await unitReadyForApproval({ 'J2.a': 2 });
      const approved = await engineer.json(`/api/fits/${u.fitId}/approve`, { method: 'POST', json: { comment: 'webhook test' } });
      expect(approved.status, JSON.stringify(approved.body)).toBe(200);

      const [approval] = await until('the approval message', () => (forUnit(r.got, u.serial, 'parameter_set.approved').length ? forUnit(r.got, u.serial, 'parameter_set.approved') : undefined));
      const body = JSON.parse(approval!.body);
      expect(body.data.parameterSet).toMatchObject({ id: approved.body.parameterSet.id, version: 2 });
      expect(body.data.fitId).toBe(u.fitId);
      expect(approval!.headers['content-type']).toBe('application/json');
      expect(approval!.headers['offsetry-webhook-event']).toBe('parameter_set.approved');
      expect(verify(secret, approval!)).toBe(true);
      // The signature covers the body and the timestamp: either changed, it no longer verifies.
      expect(verify(secret, { ...approval!, body: approval!.body.replace('"version":2', '"version":3') })).toBe(false);
      expect(verify(secret, { ...approval!, headers: { ...approval!.headers, 'offsetry-webhook-timestamp': String(Number(approval!.headers['offsetry-webhook-timestamp']) - 1) } })).toBe(false);
      expect(verify('whsec_someone-else', approval!)).toBe(false);

      const [alert] = await until('the drift alert message', () => (forUnit(r.got, u.serial, 'drift_alert.raised').length ? forUnit(r.got, u.serial, 'drift_alert.raised') : undefined));
      const alertBody = JSON.parse(alert!.body);
      expect(alertBody.data.alert.parameters.map((p: { key: string }) => p.key)).toContain('J2.a');
      expect(verify(secret, alert!)).toBe(true);

      const log = await until('the log to show both delivered', async () => {
        const d = (await deliveries(endpoint.id)).filter((x) => [approval!.headers['offsetry-webhook-id'], alert!.headers['offsetry-webhook-id']].includes(x.id));
        return d.length === 2 && d.every((x) => x.state === 'delivered') ? d : undefined;
      });
      expect(log.every((x) => x.attempts === 1 && x.lastStatus === 204)).toBe(true);
    } finally {
      await r.close();
    }
  });

  it('posts fit.finished when a fit run by the job queue is done', async () => {
    const r = await receiver();
    try {
      const { secret } = await register(r.url, ['fit.finished']);
      const fx = await createFixture({ count: 40, seed: 5 });
      const started = await engineer.json(`/api/sessions/${fx.sessionId}/fits`, { method: 'POST', json: {} });
      expect(started.status).toBe(202);
      const { fit } = await waitForFit(engineer, started.body.id);
      const mine = () => r.got.filter((g) => JSON.parse(g.body).data?.fit?.id === fit.id);
      const [got] = await until('the fit.finished message', () => (mine().length ? mine() : undefined));
      const body = JSON.parse(got!.body);
      expect(body.type).toBe('fit.finished');
      expect(body.data.fit).toMatchObject({ id: fit.id, state: fit.state, sessionId: fx.sessionId });
      expect(body.data.fit.rmsAfterMm).toBeCloseTo(fit.rmsAfterMm, 9);
      expect(verify(secret, got!)).toBe(true);
    } finally {
      await r.close();
    }
  });

  it('retries a receiver that was down until it answers', async () => {
    // A free port with nothing listening yet.
    const probe = await receiver();
    const port = probe.port;
    await probe.close();
    const { endpoint, secret } = await register(`http://127.0.0.1:${port}/hook`, ['parameter_set.approved']);
    const u = await unitReadyForApproval();
    expect((await engineer.json(`/api/fits/${u.fitId}/approve`, { method: 'POST', json: {} })).status).toBe(200);

    const failed = await until('a failed first attempt', async () => (await deliveries(endpoint.id)).find((d) => d.attempts >= 1 && d.state === 'pending'));
    expect(failed.lastError).toMatch(/ECONNREFUSED|fetch failed/);

    const r = await receiver(port);
    try {
      const [got] = await until('the retried message', () => (forUnit(r.got, u.serial).length ? forUnit(r.got, u.serial) : undefined), 90_000);
      expect(got!.headers['offsetry-webhook-id']).toBe(failed.id);
      expect(verify(secret, got!)).toBe(true);
      const done = await until('the log to show it delivered', async () => (await deliveries(endpoint.id)).find((d) => d.id === failed.id && d.state === 'delivered'));
      expect(done.attempts).toBeGreaterThanOrEqual(2);
    } finally {
      await r.close();
    }
  });

  it('hands a delivery whose job was lost back to the queue', async () => {
    const r = await receiver();
    try {
      const { endpoint, secret } = await register(r.url, ['fit.finished']);
      // A row marked queued three hours ago with no attempt since: its job is gone (a crashed worker's last try).
      const body = JSON.stringify({ id: 'lost-job-test', type: 'fit.finished', createdAt: new Date().toISOString(), data: { fit: { id: 'lost' } } });
      const [row] = await testDb()
        .insert(webhookDeliveries)
        .values({ endpointId: endpoint.id, event: 'fit.finished', body, payload: JSON.parse(body), queuedAt: new Date(Date.now() - 3 * 3600_000) })
        .returning();
      const [got] = await until('the re-queued delivery', () => (r.got.some((g) => g.body === body) ? r.got.filter((g) => g.body === body) : undefined));
      expect(got!.headers['offsetry-webhook-id']).toBe(row!.id);
      expect(verify(secret, got!)).toBe(true);
    } finally {
      await r.close();
    }
  });

  it('sends nothing to a removed endpoint', async () => {
    const kept = await receiver();
    const gone = await receiver();
    try {
      const a = await register(kept.url, ['parameter_set.approved']);
      const b = await register(gone.url, ['parameter_set.approved']);
      const removed = await admin.json(`/api/admin/webhooks/${b.endpoint.id}`, { method: 'DELETE' });
      expect(removed.status).toBe(200);
      expect((await admin.json(`/api/admin/webhooks/${b.endpoint.id}`, { method: 'DELETE' })).status).toBe(404);
      const list = await admin.json('/api/admin/webhooks');
      expect(list.body.endpoints.find((e: { id: string }) => e.id === b.endpoint.id)).toMatchObject({ active: false });

      const u = await unitReadyForApproval();
      expect((await engineer.json(`/api/fits/${u.fitId}/approve`, { method: 'POST', json: {} })).status).toBe(200);
      // The active endpoint registered at the same time gets it; by then the removed one would have too.
      await until('the kept endpoint\'s message', () => (forUnit(kept.got, u.serial).length ? true : undefined));
      await sleep(1500);
      expect(forUnit(gone.got, u.serial)).toHaveLength(0);
      expect(gone.got).toHaveLength(0);
      expect(await deliveries(b.endpoint.id)).toHaveLength(0);
      expect((await deliveries(a.endpoint.id)).length).toBeGreaterThanOrEqual(1);
    } finally {
      await kept.close();
      await gone.close();
    }
  });
});
