/**
 * The mail server away while a fit is approved: the approval stands (200, the parameter set exists), the
 * submitter's message waits in mail_outbox (pending, attempts rising, the SMTP error kept), and once the
 * mail server is back the app's sender loop delivers it — no restart of the app.
 *
 * In tests/faults because it stops the run's mail fake.
 */
import { and, eq, like } from 'drizzle-orm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mailOutbox, parameterSets } from '../../src/db/schema';
import { DEMO, signedIn, type Client } from '../support/http';
import { harnessStatus, startMail, stopMail, waitForMail } from '../support/services';
import { waitUntil } from '../support/wait';
import { createFixture, testDb, waitForFit, type Fixture } from '../integration/fit-fixtures';

let engineer: Client, engineer2: Client;
let fx: Fixture;

beforeAll(async () => {
  [engineer, engineer2] = await Promise.all([signedIn(DEMO.engineer), signedIn(DEMO.engineer2)]);
  fx = await createFixture({ count: 40, seed: 31 });
}, 60_000);

afterAll(async () => {
  // Whatever happened, the next fault test finds the mail fake running.
  if (!(await harnessStatus()).mail) await startMail();
  await testDb().$client.end();
});

async function outboxFor(subjectPart: string) {
  return testDb()
    .select()
    .from(mailOutbox)
    .where(and(eq(mailOutbox.to, DEMO.engineer), like(mailOutbox.subject, `%${subjectPart}%`)));
}

describe('mail server down during an approval', () => {
  it('keeps the approval, queues the mail with its error, and sends it when the server is back', async () => {
    const run = await engineer.json(`/api/sessions/${fx.sessionId}/fits`, { method: 'POST', json: { groups: ['lengths', 'offsets', 'base', 'tool'] } });
    expect(run.status).toBe(202);
    const { fit } = await waitForFit(engineer, run.body.id);
    expect(fit.state, fit.error ?? '').toBe('fitted');
    expect((await engineer.json(`/api/fits/${fit.id}/submit`, { method: 'POST', json: {} })).status).toBe(200);
    // The reviewers' notice goes out while the server is up, so only the approval's message is left waiting.
    await waitForMail((m) => m.recipients.includes(DEMO.engineer2) && m.text.includes(`/reviews/${fit.id}`), 20_000);

    const appBefore = (await harnessStatus()).apps.map((x) => x.pid).sort();
    expect(await stopMail()).toEqual({ running: false });

    const approved = await engineer2.json(`/api/fits/${fit.id}/approve`, { method: 'POST', json: { comment: 'checked while mail is down' } });
    expect(approved.status, JSON.stringify(approved.body)).toBe(200);
    expect(approved.body.parameterSet.version).toBe(1);
    const [set] = await testDb().select().from(parameterSets).where(eq(parameterSets.id, approved.body.parameterSet.id));
    expect(set).toMatchObject({ unitId: fx.unitId, version: 1, state: 'current', fitId: fit.id });

    // The message waits: pending, tried at least twice, the SMTP error kept.
    const subject = `Fit for unit ${fx.serial} approved`;
    const [waiting] = await waitUntil('two failed delivery attempts', () => outboxFor(subject), (rows) => rows.length === 1 && rows[0]!.attempts >= 2, { timeoutMs: 30_000 });
    expect(waiting!.status).toBe('pending');
    expect(waiting!.lastError).toMatch(/ECONNREFUSED|connect/i);
    expect(waiting!.sentAt).toBeNull();
    expect(waiting!.nextAttemptAt.getTime()).toBeGreaterThan(Date.now() - 1000);

    expect(await startMail()).toMatchObject({ running: true });
    const mail = await waitForMail((m) => m.recipients.includes(DEMO.engineer) && m.subject.startsWith(subject), 60_000);
    expect(mail.subject).toContain('parameter set v1');
    expect(mail.text).toContain('checked while mail is down');
    const [sent] = await outboxFor(subject);
    expect(sent).toMatchObject({ status: 'sent', lastError: null });
    expect(sent!.attempts).toBeGreaterThan(waiting!.attempts);
    expect(sent!.sentAt).not.toBeNull();

    // Delivered by the same app processes that were running before: nothing was restarted.
    expect((await harnessStatus()).apps.map((x) => x.pid).sort()).toEqual(appBefore);
  }, 120_000);
});
