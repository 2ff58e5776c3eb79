/**
 * Drift: tolerances per arm model, the alert raised inside an approval's transaction (mail to quality
 * captured by the mail fake, attention flag), the unit's history, and acknowledgement with a comment.
 */
import { and, eq } from 'drizzle-orm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { auditLog, driftAlerts, units } from '../../src/db/schema';
import { createDb } from '../../src/lib/server/db';
import { checkDriftOnApproval, DEFAULT_TOLERANCES, toleranceFor } from '../../src/lib/server/drift';
import { approveSet, fitAwaitingReview, makeModel, makeUnit, moved, testArm } from '../support/approved-sets';
import { BASE_URL, DEMO, signedIn, type Client } from '../support/http';
import { waitForMail } from '../support/services';

const db = createDb(process.env.DATABASE_URL!, { max: 2 });
afterAll(() => db.$client.end());

const nominal = testArm();

/** Approve a set and run the drift check in one transaction, as the approval does. */
async function approveWithCheck(unitId: string, revisionId: string, geometry: ReturnType<typeof testArm>, se?: Record<string, number>) {
  return db.transaction(async (tx) => {
    const set = await approveSet(tx, { unitId, revisionId, geometry, standardErrors: se });
    const alert = await checkDriftOnApproval(tx, { unitId, newSetId: set.setId, baseUrl: BASE_URL });
    return { set, alert };
  });
}

describe('tolerance rules', () => {
  it('uses the group tolerance in its unit, lengths/twists where a parameter has the other unit', () => {
    expect(toleranceFor({ group: 'offsets', unit: 'deg' }, DEFAULT_TOLERANCES)).toBe(0.02);
    // A prismatic joint's zero is a length (mm): the lengths tolerance applies.
    expect(toleranceFor({ group: 'offsets', unit: 'mm' }, DEFAULT_TOLERANCES)).toBe(0.2);
    // The base frame is where the tracker stood: not checked unless a tolerance is set for it.
    expect(toleranceFor({ group: 'base', unit: 'mm' }, DEFAULT_TOLERANCES)).toBeNull();
    expect(toleranceFor({ group: 'base', unit: 'deg' }, DEFAULT_TOLERANCES)).toBeNull();
    const fixedTracker = { ...DEFAULT_TOLERANCES, base: 1 };
    expect(toleranceFor({ group: 'base', unit: 'mm' }, fixedTracker)).toBe(1);
    expect(toleranceFor({ group: 'base', unit: 'deg' }, fixedTracker)).toBe(0.02);
  });
});

describe('drift alerts', () => {
  let model: Awaited<ReturnType<typeof makeModel>>;
  let unit: Awaited<ReturnType<typeof makeUnit>>;
  let engineer: Client, quality: Client;

  beforeAll(async () => {
    model = await makeModel(db, nominal);
    unit = await makeUnit(db, model.revisionId);
    [engineer, quality] = await Promise.all([signedIn(DEMO.engineer), signedIn(DEMO.quality)]);
  });

  it('reads default tolerances; only engineers/admins change them; bad values are named', async () => {
    const got = await quality.json(`/api/arm-models/${model.modelId}/tolerances`);
    expect(got.status).toBe(200);
    expect(got.body).toMatchObject({ defaults: true, tolerances: DEFAULT_TOLERANCES });
    const put = { ...DEFAULT_TOLERANCES, offsets: 0.005 };
    expect((await quality.json(`/api/arm-models/${model.modelId}/tolerances`, { method: 'PUT', json: put })).status).toBe(403);
    const bad = await engineer.json(`/api/arm-models/${model.modelId}/tolerances`, { method: 'PUT', json: { ...put, lengths: -1, extra: 1 } });
    expect(bad.status).toBe(400);
    expect(bad.body.errors.map((e: { field?: string }) => e.field)).toContain('lengths');
    expect(JSON.stringify(bad.body.errors)).toMatch(/extra/);
    const ok = await engineer.json(`/api/arm-models/${model.modelId}/tolerances`, { method: 'PUT', json: put });
    expect(ok.status).toBe(200);
    expect(ok.body).toMatchObject({ defaults: false, tolerances: put });
    const [entry] = await db.select().from(auditLog).where(and(eq(auditLog.entityId, model.modelId), eq(auditLog.action, 'tolerances.updated')));
    expect(entry?.details).toMatchObject({ after: put });
  });

  it('raises no alert for the first version or for changes within tolerance', async () => {
    const v1 = await approveWithCheck(unit.unitId, model.revisionId, moved(nominal, { 'J1.a': 0.05 }), { 'J1.a': 0.004 });
    expect(v1.alert).toBeNull();
    // J1.a +0.15 mm (tolerance 0.2), J1.theta +0.004° (tolerance now 0.005).
    const v2 = await approveWithCheck(unit.unitId, model.revisionId, moved(nominal, { 'J1.a': 0.2, 'J1.theta': 0.004 }), { 'J1.a': 0.005 });
    expect(v2.alert).toBeNull();
    const [u] = await db.select().from(units).where(eq(units.id, unit.unitId));
    expect(u!.needsAttention).toBe(false);
  });

  it('beyond tolerance: alert with the parameters, unit marked, e-mail to quality with the drift link', async () => {
    // From v2: J1.a +0.30 mm (> 0.2), J1.theta +0.010° (> 0.005), J2.a +0.1 mm (within).
    const v3 = await approveWithCheck(unit.unitId, model.revisionId, moved(nominal, { 'J1.a': 0.5, 'J1.theta': 0.014, 'J2.a': 0.1 }), { 'J1.a': 0.006 });
    expect(v3.alert).not.toBeNull();
    const details = v3.alert!.details;
    expect(details.map((d) => d.key).sort()).toEqual(['J1.a', 'J1.theta']);
    expect(details.find((d) => d.key === 'J1.a')!.change).toBeCloseTo(0.3, 9);
    expect(details.find((d) => d.key === 'J1.theta')).toMatchObject({ tolerance: 0.005, unit: 'deg' });
    const [u] = await db.select().from(units).where(eq(units.id, unit.unitId));
    expect(u!.needsAttention).toBe(true);
    const mail = await waitForMail((m) => m.recipients.includes(DEMO.quality) && m.subject.includes(unit.serial), 20_000);
    expect(mail.subject).toMatch(/v2 → v3/);
    expect(mail.text).toContain(`${BASE_URL}/units/${unit.serial}/drift`);
    // The mail says which limits the change crossed: 0.3 mm against √(0.005² + 0.006²) = 0.0078102 mm is 38.4 combined SE.
    expect(mail.text).toMatch(/J1\.a: changed by 0\.300 mm \(tolerance 0\.2 mm\) — beyond the tolerance and beyond 3 combined SE \(38\.4 combined SE\): a real change/);
    expect(details.find((d) => d.key === 'J1.a')).toMatchObject({ crossed: ['tolerance', 'standard-error'] });
    expect(details.find((d) => d.key === 'J1.a')!.multiple).toBeCloseTo(0.3 / Math.sqrt(0.005 ** 2 + 0.006 ** 2), 6);
  });

  it('shows the history with standard errors and the exceeded changes', async () => {
    const res = await quality.json(`/api/units/${unit.serial}/drift`);
    expect(res.status).toBe(200);
    expect(res.body.unit.needsAttention).toBe(true);
    const a = res.body.parameters.find((p: { key: string }) => p.key === 'J1.a');
    expect(a.points.map((p: { version: number }) => p.version)).toEqual([1, 2, 3]);
    expect(a.points.map((p: { standardError: number }) => p.standardError)).toEqual([0.004, 0.005, 0.006]);
    expect(a.points.map((p: { exceeded: boolean }) => p.exceeded)).toEqual([false, false, true]);
    expect(a.points[2].change).toBeCloseTo(0.3, 9);
    expect(a.nominal).toBe(300);
    const withFits = await quality.json(`/api/units/${unit.serial}/drift?fits=true`);
    expect(withFits.body.parameters[0].points.filter((p: { kind: string }) => p.kind === 'fit')).toHaveLength(3);
    expect((await quality.json(`/api/units/${unit.serial}/drift?fits=maybe`)).status).toBe(400);
    expect((await quality.json(`/api/units/NO-SUCH-${unit.serial}/drift`)).status).toBe(404);
    const service = await signedIn(DEMO.service);
    expect((await service.json(`/api/units/${unit.serial}/drift`)).status).toBe(403);
  });

  it('acknowledge needs a comment; clears attention only when no open alert remains; audited', async () => {
    // A second alert: v4 moves J1.a again by 0.3 mm.
    const v4 = await approveWithCheck(unit.unitId, model.revisionId, moved(nominal, { 'J1.a': 0.8, 'J1.theta': 0.014, 'J2.a': 0.1 }));
    expect(v4.alert).not.toBeNull();
    const open = await quality.json('/api/alerts');
    const mine = open.body.alerts.filter((a: { serial: string }) => a.serial === unit.serial);
    expect(mine).toHaveLength(2);
    const [newer, older] = mine;
    expect(newer.version).toBe(4);

    const missing = await quality.json(`/api/alerts/${older.id}/acknowledge`, { method: 'POST', json: {} });
    expect(missing.status).toBe(400);
    expect(missing.body.errors[0]).toMatchObject({ field: 'comment' });
    const blank = await quality.json(`/api/alerts/${older.id}/acknowledge`, { method: 'POST', json: { comment: '   ' } });
    expect(blank.status).toBe(400);

    const first = await quality.json(`/api/alerts/${older.id}/acknowledge`, { method: 'POST', json: { comment: 'Checked the J1 encoder mount.' } });
    expect(first.status).toBe(200);
    expect(first.body.unitNeedsAttention).toBe(true);
    const again = await quality.json(`/api/alerts/${older.id}/acknowledge`, { method: 'POST', json: { comment: 'twice' } });
    expect(again.status).toBe(409);

    const second = await engineer.json(`/api/alerts/${newer.id}/acknowledge`, { method: 'POST', json: { comment: 'Re-measured; the change is real, arm was repaired.' } });
    expect(second.status).toBe(200);
    expect(second.body.unitNeedsAttention).toBe(false);
    const [u] = await db.select().from(units).where(eq(units.id, unit.unitId));
    expect(u!.needsAttention).toBe(false);
    const [row] = await db.select().from(driftAlerts).where(eq(driftAlerts.id, newer.id));
    expect(row!.acknowledgeComment).toBe('Re-measured; the change is real, arm was repaired.');
    const entries = await db.select().from(auditLog).where(and(eq(auditLog.unitId, unit.unitId), eq(auditLog.action, 'drift_alert.acknowledged')));
    expect(entries).toHaveLength(2);
    const still = await quality.json('/api/alerts');
    expect(still.body.alerts.filter((a: { serial: string }) => a.serial === unit.serial)).toHaveLength(0);
  });
});

describe('drift check inside the real approval', () => {
  it('approving a fit through the API raises the alert and marks the unit', async () => {
    const m = await makeModel(db, nominal);
    const u = await makeUnit(db, m.revisionId);
    const engineer = await signedIn(DEMO.engineer);
    const first = await fitAwaitingReview(db, { unitId: u.unitId, revisionId: m.revisionId, geometry: moved(nominal, { 'J2.a': 0.01 }) });
    expect((await engineer.json(`/api/fits/${first.fitId}/approve`, { method: 'POST', json: {} })).status).toBe(200);
    const second = await fitAwaitingReview(db, { unitId: u.unitId, revisionId: m.revisionId, geometry: moved(nominal, { 'J2.a': 0.61 }) });
    expect((await engineer.json(`/api/fits/${second.fitId}/approve`, { method: 'POST', json: {} })).status).toBe(200);
    const alerts = await db.select().from(driftAlerts).where(eq(driftAlerts.unitId, u.unitId));
    expect(alerts).toHaveLength(1);
    expect(alerts[0]!.details.map((d) => d.key)).toEqual(['J2.a']);
    expect(alerts[0]!.details[0]!.change).toBeCloseTo(0.6, 9);
    const [row] = await db.select().from(units).where(eq(units.id, u.unitId));
    expect(row!.needsAttention).toBe(true);
  });
});
