/**
 * Review and approval: the state machine (illegal transitions answer 409), the four-eyes rule, the
 * immutability of approved parameter sets enforced by PostgreSQL, concurrent approvals, the audit log and
 * the e-mails (captured by the mail fake).
 */
import { and, eq } from 'drizzle-orm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { auditLog, parameterSets } from '../../src/db/schema';
import { DEMO, signedIn, type Client } from '../support/http';
import { capturedMail, type CapturedMail } from '../support/services';
import { createFixture, testDb, waitForFit, type Fixture } from './fit-fixtures';
import { poll } from '../support/wait';

let technician: Client, engineer: Client, engineer2: Client, admin: Client;

beforeAll(async () => {
  [technician, engineer, engineer2, admin] = await Promise.all([
    signedIn(DEMO.technician),
    signedIn(DEMO.engineer),
    signedIn(DEMO.engineer2),
    signedIn(DEMO.admin),
  ]);
});
afterAll(async () => {
  await testDb().$client.end();
});

/** A fitted fit of the fixture's session, run by `runner`. */
async function fitted(runner: Client, fx: Fixture, settings: Record<string, unknown> = {}): Promise<string> {
  const res = await runner.json(`/api/sessions/${fx.sessionId}/fits`, { method: 'POST', json: { groups: ['lengths', 'twists', 'offsets', 'base', 'tool'], ...settings } });
  expect(res.status).toBe(202);
  const { fit } = await waitForFit(runner, res.body.id);
  expect(fit.state, fit.error ?? '').toBe('fitted');
  return fit.id;
}

const post = (c: Client, id: string, action: string, json: unknown = {}) => c.json(`/api/fits/${id}/${action}`, { method: 'POST', json });

/** Wait until the mail fake holds a message matching `pick` (the app's sender loop delivers the outbox). */
async function mailsFor(pick: (m: CapturedMail) => boolean, atLeast = 1, timeoutMs = 20_000): Promise<CapturedMail[]> {
  return (await poll(async () => (await capturedMail()).filter(pick), (found) => found.length >= atLeast, { timeoutMs })).value;
}

describe('state machine and four-eyes rule', () => {
  let fx: Fixture;
  let fitId: string;
  beforeAll(async () => {
    fx = await createFixture({ count: 50, seed: 11 });
    fitId = await fitted(engineer, fx);
  });

  it('refuses approve and reject before submission (409)', async () => {
    expect((await post(engineer2, fitId, 'approve')).status).toBe(409);
    expect((await post(engineer2, fitId, 'reject', { comment: 'too early' })).status).toBe(409);
  });

  it('submits once, mails the other engineers with a link to the review page', async () => {
    const res = await post(engineer, fitId, 'submit', { comment: 'outliers checked' });
    expect(res.status).toBe(200);
    const again = await post(engineer, fitId, 'submit');
    expect(again.status).toBe(409);
    // One mail per reviewer, sent one by one from the outbox queue: wait for the one to engineer2.
    await mailsFor((m) => m.text.includes(`/reviews/${fitId}`) && m.recipients.includes(DEMO.engineer2));
    const mails = (await capturedMail()).filter((m) => m.text.includes(`/reviews/${fitId}`));
    const to = mails.flatMap((m) => m.recipients);
    expect(to).toContain(DEMO.engineer2);
    expect(to).not.toContain(DEMO.engineer); // the submitter is not asked to review their own fit
    expect(mails[0]!.subject).toContain(fx.serial);
  });

  it('refuses the engineer who ran the fit (four-eyes, 403) and says why', async () => {
    const res = await post(engineer, fitId, 'approve');
    expect(res.status).toBe(403);
    expect(res.body.error).toMatch(/four-eyes/i);
  });

  it('requires a reason to return a fit', async () => {
    const res = await post(engineer2, fitId, 'reject', {});
    expect(res.status).toBe(400);
    expect(res.body.errors[0].field).toBe('comment');
    expect((await post(engineer2, fitId, 'reject', { comment: '   ' })).status).toBe(400);
  });

  it('lets a second engineer approve: version 1, current, audit entries, mail to the submitter', async () => {
    const res = await post(engineer2, fitId, 'approve', { comment: 'residuals look clean' });
    expect(res.status).toBe(200);
    expect(res.body.parameterSet.version).toBe(1);
    expect((await post(engineer2, fitId, 'approve')).status).toBe(409);
    expect((await post(engineer2, fitId, 'reject', { comment: 'changed my mind' })).status).toBe(409);

    const sets = await engineer.json(`/api/units/${fx.serial}/parameter-sets`);
    expect(sets.status).toBe(200);
    expect(sets.body.parameterSets).toHaveLength(1);
    const [v1] = sets.body.parameterSets;
    expect(v1).toMatchObject({ version: 1, state: 'current', fitId, approvedByEmail: DEMO.engineer2, comment: 'residuals look clean' });
    expect(v1.geometry.format).toBe('offsetry-arm/1');
    expect(Object.keys(v1.standardErrors).length).toBeGreaterThan(10);

    const fit = (await engineer.json(`/api/fits/${fitId}`)).body.fit;
    expect(fit).toMatchObject({ reviewState: 'approved', decisionComment: 'residuals look clean', decidedByName: 'Dara Okafor' });
    expect(fit.parameterSet).toMatchObject({ version: 1, state: 'current' });

    const entries = await testDb().select().from(auditLog).where(eq(auditLog.unitId, fx.unitId));
    const actions = entries.map((e) => e.action);
    for (const a of ['fit.created', 'fit.fitted', 'fit.submitted', 'fit.approved', 'parameter_set.created']) expect(actions, a).toContain(a);
    expect(entries.find((e) => e.action === 'fit.submitted')!.comment).toBe('outliers checked');

    const mails = await mailsFor((m) => m.text.includes(`/fits/${fitId}`) && /approved/i.test(m.subject));
    expect(mails.flatMap((m) => m.recipients)).toEqual([DEMO.engineer]);
    expect(mails[0]!.text).toContain('v1');
  });

  it('lets an admin approve a fit they ran and submitted; the previous set is superseded', async () => {
    const second = await fitted(admin, fx);
    expect((await post(admin, second, 'submit')).status).toBe(200);
    const res = await post(admin, second, 'approve');
    expect(res.status).toBe(200);
    expect(res.body.parameterSet.version).toBe(2);
    const sets = (await engineer.json(`/api/units/${fx.serial}/parameter-sets`)).body.parameterSets;
    expect(sets.map((s: { version: number; state: string }) => [s.version, s.state])).toEqual([
      [2, 'current'],
      [1, 'superseded'],
    ]);
    const superseded = await testDb().select().from(auditLog).where(and(eq(auditLog.unitId, fx.unitId), eq(auditLog.action, 'parameter_set.superseded')));
    expect(superseded).toHaveLength(1);
  });

  it('keeps a returned fit on record with the reason, and does not take it back for review', async () => {
    const third = await fitted(technician, fx);
    expect((await post(technician, third, 'submit')).status).toBe(200);
    const res = await post(engineer, third, 'reject', { comment: 'J3 beta is poorly determined; add poses with J3 far from 0' });
    expect(res.status).toBe(200);
    const fit = (await engineer.json(`/api/fits/${third}`)).body.fit;
    expect(fit).toMatchObject({ state: 'fitted', reviewState: 'returned', decisionComment: expect.stringContaining('J3 beta') });
    expect((await post(technician, third, 'submit')).status).toBe(409);
    expect((await post(engineer2, third, 'approve')).status).toBe(409);
    const mails = await mailsFor((m) => m.text.includes(`/fits/${third}`) && /returned/i.test(m.subject));
    expect(mails.flatMap((m) => m.recipients)).toEqual([DEMO.technician]);
    expect(mails[0]!.text).toContain('J3 beta');
  });

  it('refuses roles outside the table (quality may not approve)', async () => {
    const quality = await signedIn(DEMO.quality);
    expect((await post(quality, fitId, 'approve')).status).toBe(403);
  });
});

describe('immutability in the database', () => {
  it('refuses UPDATE and DELETE of an approved parameter set from plain SQL', async () => {
    const fx = await createFixture({ count: 40, seed: 21 });
    const id = await fitted(technician, fx);
    await post(technician, id, 'submit');
    const approved = await post(engineer, id, 'approve');
    expect(approved.status).toBe(200);
    const setId = approved.body.parameterSet.id as string;
    const sql = testDb().$client;
    await expect(sql`update parameter_sets set comment = 'edited' where id = ${setId}`).rejects.toThrow(/cannot be changed/);
    await expect(sql`update parameter_sets set geometry = '{}'::jsonb where id = ${setId}`).rejects.toThrow(/cannot be changed/);
    await expect(sql`update parameter_sets set state = 'superseded', version = 99 where id = ${setId}`).rejects.toThrow(/cannot be changed/);
    await expect(sql`delete from parameter_sets where id = ${setId}`).rejects.toThrow(/cannot be deleted/);
    const [row] = await testDb().select().from(parameterSets).where(eq(parameterSets.id, setId));
    expect(row).toMatchObject({ state: 'current', comment: '', version: 1 });
  });
});

describe('concurrent approvals', () => {
  it('two engineers approving the same fit at once yield one version and one 409', async () => {
    const fx = await createFixture({ count: 40, seed: 31 });
    const id = await fitted(technician, fx);
    expect((await post(technician, id, 'submit')).status).toBe(200);
    const results = await Promise.all([post(engineer, id, 'approve'), post(engineer2, id, 'approve')]);
    expect(results.map((r) => r.status).sort()).toEqual([200, 409]);
    const rows = await testDb().select().from(parameterSets).where(eq(parameterSets.unitId, fx.unitId));
    expect(rows).toHaveLength(1);
    expect(rows[0]).toMatchObject({ version: 1, state: 'current', fitId: id });
    const approvals = await testDb().select().from(auditLog).where(and(eq(auditLog.entityId, id), eq(auditLog.action, 'fit.approved')));
    expect(approvals).toHaveLength(1);
  });

  it('approvals of two fits of one unit at once give versions 1 and 2 with one current', async () => {
    const fx = await createFixture({ count: 40, seed: 41 });
    // Different seeds: identical settings started at once would be one fit.
    const [a, b] = await Promise.all([fitted(technician, fx), fitted(technician, fx, { seed: 2 })]);
    await post(technician, a, 'submit');
    await post(technician, b, 'submit');
    const results = await Promise.all([post(engineer, a, 'approve'), post(engineer2, b, 'approve')]);
    expect(results.map((r) => r.status)).toEqual([200, 200]);
    const rows = await testDb().select().from(parameterSets).where(eq(parameterSets.unitId, fx.unitId));
    expect(rows.map((r) => r.version).sort()).toEqual([1, 2]);
    expect(rows.filter((r) => r.state === 'current')).toHaveLength(1);
    expect(rows.find((r) => r.state === 'current')!.version).toBe(2);
  });
});

describe('comparison', () => {
  it('compares nominal with an approved set parameter by parameter and over the workspace', async () => {
    const fx = await createFixture({ count: 50, seed: 51 });
    const id = await fitted(technician, fx);
    await post(technician, id, 'submit');
    const setId = (await post(engineer, id, 'approve')).body.parameterSet.id;
    const res = await engineer.json(`/api/units/${fx.serial}/compare?a=nominal&b=${setId}`);
    expect(res.status).toBe(200);
    const j2a = res.body.parameters.find((p: { key: string }) => p.key === 'J2.a');
    // The invented truth has J2.a 0.18 mm longer than nominal; the fit finds it (noise 0.015 mm).
    expect(j2a.difference).toBeCloseTo(0.18, 1);
    expect(res.body.workspace.samples).toBe(2000);
    expect(res.body.workspace.maxMm).toBeGreaterThan(res.body.workspace.rmsMm);
    expect(res.body.workspace.rmsMm).toBeGreaterThan(0.1);
    // A set against itself differs nowhere.
    const same = await engineer.json(`/api/units/${fx.serial}/compare?a=${setId}&b=fit:${id}`);
    expect(same.status).toBe(200);
    expect(same.body.workspace.maxMm).toBeLessThan(1e-9);
    const bad = await engineer.json(`/api/units/${fx.serial}/compare?a=nominal&b=fit:nonsense`);
    expect(bad.status).toBe(400);
    expect(bad.body.errors[0].field).toBe('b');
  });
});
