/**
 * The demo's drilling program (scripts/demo-compensation.ts) on a unit of the demo's six-axis model with an
 * approved set: stored and compensated through the job's code, every hole reached, corrections at the
 * calibration's millimetre level, and a second seed adds nothing.
 */
import { eq } from 'drizzle-orm';
import { afterAll, describe, expect, it } from 'vitest';
import { compensations } from '../../src/db/schema';
import { createDb } from '../../src/lib/server/db';
import { drillingProgram, seedCompensation } from '../../scripts/demo-compensation';
import { UNITS } from '../../scripts/demo-scenario';
import { approveSet, makeModel, makeUnit, moved } from '../support/approved-sets';
import { serviceEnv } from '../support/services';

const db = createDb(serviceEnv().databaseUrl, { max: 2 });
afterAll(() => db.$client.end());

describe('demo drilling program', () => {
  it('is a few hundred targets, compensated for the unit\'s set, idempotent', async () => {
    const r6 = UNITS.find((u) => u.serial === 'LCS-R6-0102')!.model;
    expect(drillingProgram(6).trim().split('\n')).toHaveLength(241);
    const m = await makeModel(db, r6);
    const u = await makeUnit(db, m.revisionId);
    await approveSet(db, { unitId: u.unitId, revisionId: m.revisionId, geometry: moved(r6, { 'J2.a': 0.4, 'J3.theta': 0.03, 'J4.d': -0.3, 'J2.theta': -0.02 }) });
    expect(await seedCompensation(db, u.serial)).toMatch(/compensated \(done\)/);
    const [c] = await db.select().from(compensations).where(eq(compensations.unitId, u.unitId));
    expect(c.state).toBe('done');
    expect(c.summary!.counts.reached).toBe(240);
    expect(c.summary!.maxCorrectionMm).toBeGreaterThan(0.1);
    expect(c.summary!.maxCorrectionMm).toBeLessThan(10);
    expect(await seedCompensation(db, u.serial)).toMatch(/already there/);
    expect(await db.select().from(compensations).where(eq(compensations.unitId, u.unitId))).toHaveLength(1);
  });
});
