/**
 * The invented demo scenario seeds through the same storage path as uploads (S3 object + rows), is
 * idempotent, and its sessions look like the brief says: 3–4 visits per unit over two years, 60–80 poses
 * plus repeat visits, a split column on most, and nominal errors well above tracker noise.
 */
import { ListObjectsV2Command } from '@aws-sdk/client-s3';
import { eq, inArray } from 'drizzle-orm';
import { afterAll, describe, expect, it } from 'vitest';
import { sessions, units } from '../../src/db/schema';
import { createDb } from '../../src/lib/server/db';
import { sessionCheck } from '../../src/lib/server/session-checks';
import { seedScenario } from '../../scripts/demo-scenario';
import { serviceEnv } from '../support/services';
import { testS3 } from '../support/s3';

const env = serviceEnv();
const db = createDb(env.databaseUrl, { max: 2 });
afterAll(() => db.$client.end());

describe('demo scenario', () => {
  it('seeds a dozen units with stored sessions, and a second run adds nothing', async () => {
    const first = await seedScenario(db);
    console.info(first);
    const demoUnits = await db.select().from(units).where(inArray(units.serial, [
      'LCS-R6-0101', 'LCS-R6-0102', 'LCS-R6-0103', 'LCS-R6-0104', 'LCS-R6-0105', 'LCS-R6-0106', 'LCS-R6-0107', 'LCS-R6-0108',
      'LCS-S4-0201', 'LCS-S4-0202', 'LCS-S4-0203', 'LCS-S4-0204',
    ]));
    expect(demoUnits).toHaveLength(12);
    const rows = await db.select().from(sessions).where(inArray(sessions.unitId, demoUnits.map((u) => u.id)));
    const perUnit = new Map<string, typeof rows>();
    for (const s of rows) perUnit.set(s.unitId, [...(perUnit.get(s.unitId) ?? []), s]);
    for (const u of demoUnits) {
      const list = perUnit.get(u.id) ?? [];
      expect(list.length).toBeGreaterThanOrEqual(3);
      expect(list.length).toBeLessThanOrEqual(4);
      const dates = list.map((s) => s.measuredOn).sort();
      const spanDays = (Date.parse(dates.at(-1)!) - Date.parse(dates[0]!)) / 86_400_000;
      expect(spanDays).toBeGreaterThan(500);
      expect(spanDays).toBeLessThan(760);
    }
    for (const s of rows) {
      expect(s.poseCount).toBeGreaterThanOrEqual(66); // 60–80 configurations + 6 repeat visits
      expect(s.poseCount).toBeLessThanOrEqual(86);
      expect(s.repeatGroups).toBe(3);
    }
    expect(rows.filter((s) => s.hasSplit).length).toBeGreaterThan(rows.length / 2);

    // Each session's object is in the bucket under its unit and id.
    const s0 = rows[0]!;
    const unit0 = demoUnits.find((u) => u.id === s0.unitId)!;
    const listed = await testS3().send(new ListObjectsV2Command({ Bucket: env.s3.bucket, Prefix: `sessions/${unit0.serial}/` }));
    expect((listed.Contents ?? []).map((o) => o.Key)).toContain(s0.fileKey);

    // The nominal model is off by tenths of a millimetre per parameter: errors well above the 0.01–0.03 mm noise.
    const check = await sessionCheck(s0.id, undefined, db);
    expect(check!.stats.rms).toBeGreaterThan(0.1);

    const second = await seedScenario(db);
    expect(second).toMatch(/0 new arm models, 0 new units, 0 new sessions/);
    const again = await db.select({ id: sessions.id }).from(sessions).where(inArray(sessions.unitId, demoUnits.map((u) => u.id)));
    expect(again).toHaveLength(rows.length);
  });

  it('one unit drifts clearly more between visits than the others', async () => {
    const rmsByVisit = async (serial: string) => {
      const [u] = await db.select().from(units).where(eq(units.serial, serial));
      const list = (await db.select().from(sessions).where(eq(sessions.unitId, u!.id))).sort((a, b) => a.measuredOn.localeCompare(b.measuredOn));
      return Promise.all(list.map(async (s) => (await sessionCheck(s.id, undefined, db))!.stats.rms));
    };
    const drifting = await rmsByVisit('LCS-R6-0104');
    const steady = await rmsByVisit('LCS-R6-0102');
    const growth = (r: number[]) => r.at(-1)! - r[0]!;
    expect(growth(drifting)).toBeGreaterThan(growth(steady) + 0.3);
  });
});
