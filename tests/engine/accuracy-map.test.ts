/** The before/after accuracy map (src/lib/engine/accuracy-map.ts). */
import { describe, expect, it } from 'vitest';
import { accuracyMap } from '../../src/lib/engine/accuracy-map';
import { jointRanges, workspaceDifference } from '../../src/lib/engine/workspace';
import type { ArmGeometry } from '../../src/lib/engine/types';
import { sixAxisDh } from './helpers';

/** Planar two-link arm (DH, hand-solvable): p = (a1 cos q1 + a2 cos(q1+q2), a1 sin q1 + a2 sin(q1+q2), d1). */
const planar = (a1: number): ArmGeometry => ({
  format: 'offsetry-arm/1',
  name: 'planar',
  convention: 'dh',
  joints: [
    { name: 'J1', type: 'revolute', a: a1, alpha: 0, d: 250, theta: 0, min: -150, max: 150 },
    { name: 'J2', type: 'revolute', a: 200, alpha: 0, d: 0, theta: 0, min: -140, max: 140 },
  ],
});

describe('accuracy map', () => {
  it('a longer first link moves every point by exactly the change (hand-solved planar arm)', () => {
    // Changing a1 by δ moves the tip by δ·(cos q1, sin q1, 0): |Δp| = δ for every configuration.
    const m = accuracyMap(planar(300), planar(301.5), { samples: 4000 });
    expect(m.maxMm).toBeCloseTo(1.5, 10);
    expect(m.meanMm).toBeCloseTo(1.5, 10);
    const xy = m.planes.find((p) => p.axes === 'xy')!;
    const filled = xy.cells.flat().filter((c): c is number => c !== null);
    expect(filled.length).toBeGreaterThan(50);
    for (const c of filled) expect(c).toBeCloseTo(1.5, 10);
    expect(m.scaleMaxMm).toBeCloseTo(1.5, 10);
  });

  it('agrees with workspaceDifference on the same draw, is reproducible, and varies over the workspace', () => {
    const nominal = sixAxisDh();
    const calibrated: ArmGeometry = { ...nominal, joints: nominal.joints.map((j, i) => (i === 1 ? { ...j, theta: j.theta + 0.05, a: j.a + 0.3 } : j)), base: { x: 1980, y: 0, z: 0, rx: 0, ry: 0, rz: 31 } };
    const m = accuracyMap(nominal, calibrated, { samples: 20_000, seed: 7 });
    const w = workspaceDifference(nominal, calibrated, jointRanges(nominal), { samples: 20_000, seed: 7 });
    expect(m.meanMm).toBeCloseTo(w.meanMm, 9);
    expect(m.maxMm).toBeCloseTo(w.maxMm, 9);
    // The tracker placement (base) does not count: differences are those of the joint change, a few tenths of a mm.
    expect(m.maxMm).toBeLessThan(5);
    expect(JSON.stringify(accuracyMap(nominal, calibrated, { samples: 20_000, seed: 7 }))).toBe(JSON.stringify(m));
    expect(m.planes.map((p) => p.axes)).toEqual(['xy', 'xz', 'yz']);
    for (const p of m.planes) {
      const filled = p.cells.flat().filter((c): c is number => c !== null);
      expect(p.samples).toBeGreaterThan(500);
      expect(Math.max(...filled) - Math.min(...filled)).toBeGreaterThan(0.01);
      expect(Math.max(...filled)).toBeLessThanOrEqual(m.scaleMaxMm);
    }
  });
});
