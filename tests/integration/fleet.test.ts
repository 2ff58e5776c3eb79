/**
 * Fleet statistics against hand-checked values, through the real database and the real HTTP API.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createDb } from '../../src/lib/server/db';
import { fleetStatistics, outsideOthers, positionError, spread } from '../../src/lib/server/fleet';
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
 * J1.a over all four, by hand: mean = 0.80 / 4 = 0.20; residuals −0.10, −0.08, −0.12, +0.30; squares
 *   0.0100 + 0.0064 + 0.0144 + 0.0900 = 0.1208; sample variance 0.1208 / 3 = 0.0402667; σ = 0.2006656;
 *   limits 0.20 ± 3σ = 0.20 ± 0.6019967 = −0.4019967 … 0.8019967. D's σ-score 0.30 / 0.2006656 = 1.495025 (Samuelson's bound for
 *   n = 4 is (n − 1)/√n = 1.5: no unit of four can leave its own fleet's ±3σ).
 * D against the OTHER three (A, B, C): mean 0.10, residuals 0, +0.02, −0.02, σ = √(0.0008 / 2) = 0.02,
 *   limits 0.04 … 0.16 ⇒ D (0.50) is outside. A against B, C, D: mean 0.23333, σ = 0.23180, inside; so are B, C.
 * J2.theta: mean 0.005; residuals 0.005, −0.015, 0.015, −0.005; squares sum 0.0005; σ = √(0.0005 / 3) = 0.0129099.
 *   Leave-one-out: C (0.02) vs A, B, D: mean 0, σ 0.01, limits ±0.03 ⇒ inside; nobody is outside.
 * base.x: mean 2150, σ = √(50000 / 3) = 129.0994; D vs A, B, C: mean 2100, σ 100, limits 1800 … 2400 ⇒ inside.
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

  it('mean, sample σ and ±3σ limits match the hand-checked values', async () => {
    const stats = (await fleetStatistics(modelId, db))!;
    expect(stats.unitCount).toBe(4);
    const p = (key: string) => stats.parameters.find((x) => x.key === key)!;
    expect(p('J1.a').n).toBe(4);
    expect(p('J1.a').mean).toBeCloseTo(0.2, 10);
    expect(p('J1.a').sd).toBeCloseTo(0.2006656, 7);
    expect(p('J1.a').lower).toBeCloseTo(-0.4019967, 7);
    expect(p('J1.a').upper).toBeCloseTo(0.8019967, 7);
    expect(p('J2.theta').mean).toBeCloseTo(0.005, 10);
    expect(p('J2.theta').sd).toBeCloseTo(0.0129099, 7);
    expect(p('base.x').sd).toBeCloseTo(129.0994, 4);
    // Parameters nobody moved: σ 0, nobody outside.
    expect(p('J1.d')).toMatchObject({ mean: 0, sd: 0, outside: [] });
    // Group order: lengths, twists, offsets, beta, base, tool.
    const groups = stats.parameters.map((x) => x.group).filter((g, i, all) => all.indexOf(g) === i);
    expect(groups).toEqual(['lengths', 'twists', 'offsets', 'beta', 'base', 'tool']);
  });

  it('lists the out-of-limit unit (D on J1.a) and nobody else', async () => {
    const stats = (await fleetStatistics(modelId, db))!;
    expect(stats.outside.map((o) => [o.serial, o.key])).toEqual([[serial.D, 'J1.a']]);
    const o = stats.outside[0]!;
    expect(o.deviation).toBeCloseTo(0.5, 10);
    expect(o.lower).toBeCloseTo(0.04, 10);
    expect(o.upper).toBeCloseTo(0.16, 10);
    const d = stats.units.find((u) => u.serial === serial.D)!;
    expect(d.outside).toEqual(['J1.a']);
    expect(d.version).toBe(2);
    expect(d.sigmas['J1.a']).toBeCloseTo(1.495025, 6);
    expect(d.deviations['J1.a']).toBeCloseTo(0.5, 10);
  });

  it('leave-one-out limits and spread helpers agree with the hand values', () => {
    expect(spread([0.1, 0.12, 0.08])).toMatchObject({ n: 3 });
    expect(spread([0.1, 0.12, 0.08]).sd).toBeCloseTo(0.02, 12);
    expect(outsideOthers([0.1, 0.12, 0.08, 0.5], 3)).toMatchObject({ outside: true });
    expect(outsideOthers([0.1, 0.12, 0.08, 0.5], 0)).toMatchObject({ outside: false });
    // Fewer than two others: no σ, no verdict.
    expect(outsideOthers([0.1, 0.5], 1)).toBeNull();
    expect(spread([1]).sd).toBeNull();
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
    expect(res.body.statistics.standardDeviation).toMatch(/n − 1/);
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
