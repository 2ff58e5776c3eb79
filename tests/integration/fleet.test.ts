/**
 * Fleet statistics against hand-checked values, through the real database and the real HTTP API.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createDb } from '../../src/lib/server/db';
import { fleetStatistics, positionError } from '../../src/lib/server/fleet';
import { approveSet, makeModel, makeUnit, moved, testArm } from '../support/approved-sets';
import { DEMO, signedIn, uniq } from '../support/http';

const db = createDb(process.env.DATABASE_URL!, { max: 2 });
afterAll(() => db.$client.end());

/*
 * The tiny fleet, deviations from nominal chosen per unit:
 *
 *   unit   J1.a (mm)   J2.theta (deg)   base.x (mm, where the tracker stood)
 *   A      +0.10       +0.01            2000
 *   B      +0.12       −0.01            2100
 *   C      +0.08       +0.02            2200
 *   D      +0.50        0.00            2300
 *
 * J1.a over all four: mean 0.20, sample σ √(0.1208 / 3) = 0.2006656 (shown, not the rule).
 * The rule (src/lib/engine/fleet-judgement.ts), α = 4 %, K = 2 judged parameters (J1.a, J2.theta; base.x
 * never; every other parameter has no spread), so the level is 0.02 per parameter:
 * D on J1.a: reference A, B, C (median 0.10, MAD 0.02, nobody set aside): x̄ = 0.10, s² = 0.0004, m = 3.
 *   No spread prior (J1.a is the only length with spread): plain Student t, ν = 2.
 *   scale = √(0.0004 · (1 + 1/3)) = 0.0230940; t = 0.40 / 0.0230940 = 17.3205.
 *   For ν = 2 the two-sided tail is closed-form, p = 1 − |t| / √(2 + t²) = 1 − 17.3205 / √302 = 0.0033168 < 0.02 ⇒ out of line.
 *   Critical t for p = 0.02: t / √(2 + t²) = 0.98 ⇒ t² = 2 · 0.9604 / 0.0396 = 48.50505, t = 6.964557;
 *   limits 0.10 ± 6.964557 · 0.0230940 = 0.10 ± 0.1608393 ⇒ −0.0608393 … 0.2608393.
 * A on J1.a: of B, C, D (median 0.12, MAD 0.04, robust σ 0.059304), D lies 0.38 > 5 · 0.059304 from the
 *   median and is set aside; two units are left, fewer than three: A is not judged on J1.a (nor B, C).
 * C on J2.theta: reference A, B, D: x̄ = 0, s = 0.01, scale 0.0115470, t = 1.73205, p = 1 − 1.73205 / √5 = 0.225403: in line.
 */
const FLEET: Record<string, Record<string, number>> = {
  A: { 'J1.a': 0.1, 'J2.theta': 0.01, 'base.x': 2000 },
  B: { 'J1.a': 0.12, 'J2.theta': -0.01, 'base.x': 2100 },
  C: { 'J1.a': 0.08, 'J2.theta': 0.02, 'base.x': 2200 },
  D: { 'J1.a': 0.5, 'J2.theta': 0, 'base.x': 2300 },
};

describe('fleet statistics', () => {
  let modelId = '';
  const serial: Record<string, string> = {};
  const nominal = testArm();

  beforeAll(async () => {
    const m = await makeModel(db, nominal);
    modelId = m.modelId;
    const tag = uniq('FL-');
    for (const [name, changes] of Object.entries(FLEET)) {
      const u = await makeUnit(db, m.revisionId, `${tag}-${name}`);
      serial[name] = u.serial;
      // An earlier, superseded version must not count: only current sets are the fleet.
      await approveSet(db, { unitId: u.unitId, revisionId: m.revisionId, geometry: moved(nominal, { 'J1.a': 5 }) });
      await approveSet(db, { unitId: u.unitId, revisionId: m.revisionId, geometry: moved(nominal, changes) });
    }
    // A unit without any approved set is not part of the statistics.
    await makeUnit(db, m.revisionId, `${tag}-E`);
  });

  it('reports the spread, judges only the arm, and flags D on J1.a by the hand-checked limits', async () => {
    const stats = (await fleetStatistics(modelId, db))!;
    expect(stats.unitCount).toBe(4);
    const p = (key: string) => stats.parameters.find((x) => x.key === key)!;
    expect(p('J1.a')).toMatchObject({ n: 4, judged: true });
    expect(p('J1.a').mean).toBeCloseTo(0.2, 10);
    expect(p('J1.a').sd).toBeCloseTo(0.2006656, 7);
    expect(p('J2.theta').sd).toBeCloseTo(0.0129099, 7);
    expect(p('base.x')).toMatchObject({ judged: false });
    expect(p('base.x').reason).toMatch(/tracker/);
    expect(p('J1.d')).toMatchObject({ judged: false, outside: [] });
    expect(stats.statistics.judgedParameters).toBe(2);
    // Group order: lengths, twists, offsets, beta, base, tool.
    const groups = stats.parameters.map((x) => x.group).filter((g, i, all) => all.indexOf(g) === i);
    expect(groups).toEqual(['lengths', 'twists', 'offsets', 'beta', 'base', 'tool']);

    expect(stats.outside.map((o) => [o.serial, o.key])).toEqual([[serial.D, 'J1.a']]);
    expect(stats.flaggedUnits).toEqual([serial.D]);
    const o = stats.outside[0]!;
    expect(o.deviation).toBeCloseTo(0.5, 10);
    expect(o.p).toBeCloseTo(0.0033168, 6);
    expect(o.lower).toBeCloseTo(-0.0608393, 6);
    expect(o.upper).toBeCloseTo(0.2608393, 6);
    const d = stats.units.find((u) => u.serial === serial.D)!;
    expect(d.outside).toEqual(['J1.a']);
    expect(d.version).toBe(2);
    // The score is beyond the chart's line exactly when the value is beyond the limits: one rule.
    expect(Math.abs(d.scores['J1.a']!)).toBeGreaterThan(d.criticalScore);
    const a = stats.units.find((u) => u.serial === serial.A)!;
    expect(a.scores['J1.a']).toBeUndefined();
    const c = stats.units.find((u) => u.serial === serial.C)!;
    expect(c.limits['J2.theta']!.p).toBeCloseTo(0.225403, 5);
    expect(Math.abs(c.scores['J2.theta']!)).toBeLessThan(c.criticalScore);
  });

  it('predicts the nominal-vs-calibrated position error exactly for hand-solvable changes', () => {
    // Planar joints (alpha 0 on J1, J2): lengthening a1 by δ moves the point by δ along link 1 at every
    // configuration, so max = RMS = δ.
    const a = positionError(nominal, moved(nominal, { 'J1.a': 0.1 }));
    expect(a.maxMm).toBeCloseTo(0.1, 10);
    expect(a.rmsMm).toBeCloseTo(0.1, 10);
    // A zero-offset change ε on J2 swings everything after J2 by ε about J2's axis. The point's distance from
    // that axis is constant here (J3 slides along it, as alpha 180 flips z: a2 + tool x, planar), so the error
    // is the chord 2·r·sin(ε/2) with r = |(a2 + tool.x)| = 215 mm: 0.01° ⇒ 0.0375246 mm.
    const r = 200 + 15;
    const chord = 2 * r * Math.sin((0.01 * Math.PI) / 180 / 2);
    const t = positionError(nominal, moved(nominal, { 'J2.theta': 0.01 }));
    expect(t.maxMm).toBeCloseTo(chord, 10);
    expect(t.rmsMm).toBeCloseTo(chord, 10);
    // The base (where the tracker stood) is not an error of the arm.
    expect(positionError(nominal, moved(nominal, { 'base.x': 2000 })).maxMm).toBe(0);
  });

  it('serves the statistics over HTTP to quality and refuses service', async () => {
    const quality = await signedIn(DEMO.quality);
    const res = await quality.json(`/api/arm-models/${modelId}/fleet`);
    expect(res.status).toBe(200);
    expect(res.body.unitCount).toBe(4);
    expect(res.body.statistics.rule).toMatch(/Bonferroni/);
    expect(res.body.outside).toHaveLength(1);
    expect(res.body.outside[0].serial).toBe(serial.D);
    // D's nominal-vs-calibrated error: J1.a 0.5 mm exactly (J2.theta 0, base ignored).
    const d = res.body.units.find((u: { serial: string }) => u.serial === serial.D);
    expect(d.positionError.maxMm).toBeCloseTo(0.5, 9);
    expect(res.body.positionError.fleet.maxMm).toBeGreaterThanOrEqual(d.positionError.maxMm);
    const service = await signedIn(DEMO.service);
    expect((await service.json(`/api/arm-models/${modelId}/fleet`)).status).toBe(403);
    expect((await quality.json(`/api/arm-models/00000000-0000-4000-8000-000000000000/fleet`)).status).toBe(404);
  });
});
