/** The numbers behind the arm sketch: joint positions from forward kinematics, slider ranges, ticks. */
import { describe, expect, it } from 'vitest';
import { chainPoints, jointRange, niceTicks, zeroPose } from '../../src/components/arm-models/chain';
import type { ArmGeometry } from '../../src/lib/engine/types';

// Planar two-link arm in DH: a1 = 300, a2 = 200, all twists 0 (common practice: any robotics textbook's
// first example). Joint 2 sits at (l1 cos q1, l1 sin q1, 0), the tool at
// (l1 cos q1 + l2 cos(q1 + q2), l1 sin q1 + l2 sin(q1 + q2), 0).
const planar: ArmGeometry = {
  format: 'offsetry-arm/1',
  name: 'PLANAR-2',
  convention: 'dh',
  joints: [
    { name: 'J1', type: 'revolute', a: 300, alpha: 0, d: 0, theta: 0, min: -90, max: 90 },
    { name: 'J2', type: 'revolute', a: 200, alpha: 0, d: 0, theta: 0, min: 10, max: 150 },
  ],
};

describe('chainPoints', () => {
  it('matches the closed form of a planar two-link arm', () => {
    const q1 = 30;
    const q2 = 45;
    const r = Math.PI / 180;
    const pts = chainPoints(planar, [q1, q2]);
    expect(pts.map((p) => p.label)).toEqual(['base', 'J1', 'J2', 'tool']);
    expect(pts[0]).toMatchObject({ x: 0, y: 0, z: 0 });
    // In DH the frame of joint 1 sits at the end of link 1.
    expect(pts[1]!.x).toBeCloseTo(300 * Math.cos(q1 * r), 9);
    expect(pts[1]!.y).toBeCloseTo(300 * Math.sin(q1 * r), 9);
    expect(pts[3]!.x).toBeCloseTo(300 * Math.cos(q1 * r) + 200 * Math.cos((q1 + q2) * r), 9);
    expect(pts[3]!.y).toBeCloseTo(300 * Math.sin(q1 * r) + 200 * Math.sin((q1 + q2) * r), 9);
    expect(pts[3]!.z).toBeCloseTo(0, 12);
  });

  it('applies the tool offset and the base frame', () => {
    const g: ArmGeometry = { ...planar, base: { x: 10, y: 20, z: 30, rx: 0, ry: 0, rz: 0 }, tool: { x: 0, y: 0, z: 50, rx: 0, ry: 0, rz: 0 } };
    const tool = chainPoints(g, [0, 0]).at(-1)!;
    expect(tool.x).toBeCloseTo(510, 9);
    expect(tool.y).toBeCloseTo(20, 9);
    expect(tool.z).toBeCloseTo(80, 9);
  });
});

describe('slider ranges', () => {
  it('use the limits, else a full turn or ±500 mm', () => {
    expect(jointRange(planar.joints[0]!)).toMatchObject({ min: -90, max: 90, unit: 'deg' });
    expect(jointRange({ name: 'J', type: 'prismatic', a: 0, alpha: 0, d: 0, theta: 0 })).toMatchObject({ min: -500, max: 500, unit: 'mm' });
    expect(jointRange({ name: 'J', type: 'revolute', a: 0, alpha: 0, d: 0, theta: 0 })).toMatchObject({ min: -180, max: 180 });
  });

  it('start from zero, clamped into limits that exclude it', () => {
    expect(zeroPose(planar)).toEqual([0, 10]);
  });
});

describe('niceTicks', () => {
  it('gives round steps covering the range', () => {
    expect(niceTicks(-120, 480, 6)).toEqual([-100, 0, 100, 200, 300, 400]);
    expect(niceTicks(0, 1, 5)).toEqual([0, 0.2, 0.4, 0.6, 0.8, 1]);
    expect(niceTicks(5, 5)).toEqual([5]);
  });
});
