/**
 * Invented arms and seeded data for the engine tests. The arms are made up for Offsetry's tests
 * (no real product's parameters); the noise is tracker-like (0.01–0.03 mm per coordinate).
 */
import type { ArmGeometry, SessionPose } from '../../src/lib/engine/types';
import { forwardPoint } from '../../src/lib/engine/kinematics';
import { seededRandom } from '../../src/lib/engine/workspace';

/** Seeded uniform generator (the engine's mulberry32), so every test run sees the same data. */
export const rng = seededRandom;

export function gaussian(r: () => number): number {
  // Box–Muller.
  const u = Math.max(r(), 1e-300);
  return Math.sqrt(-2 * Math.log(u)) * Math.cos(2 * Math.PI * r());
}

/** Invented six-axis articulated arm "Test arm TA-6" (DH), with beta listed on J3 (J2 ∥ J3). */
export function sixAxisDh(): ArmGeometry {
  return {
    format: 'offsetry-arm/1',
    name: 'Test arm TA-6',
    convention: 'dh',
    joints: [
      { name: 'J1', type: 'revolute', a: 150, alpha: -90, d: 420, theta: 0, min: -170, max: 170 },
      { name: 'J2', type: 'revolute', a: 610, alpha: 0, d: 0, theta: -90, beta: 0, min: -120, max: 80 },
      { name: 'J3', type: 'revolute', a: 115, alpha: -90, d: 0, theta: 0, min: -110, max: 150 },
      { name: 'J4', type: 'revolute', a: 0, alpha: 90, d: 640, theta: 0, min: -180, max: 180 },
      { name: 'J5', type: 'revolute', a: 0, alpha: -90, d: 0, theta: 0, min: -120, max: 120 },
      { name: 'J6', type: 'revolute', a: 0, alpha: 0, d: 105, theta: 0, min: -350, max: 350 },
    ],
    tool: { x: 12, y: -8, z: 135, rx: 0, ry: 0, rz: 0 },
  };
}

/** The same kind of arm in modified DH (invented values). */
export function sixAxisMdh(): ArmGeometry {
  return {
    format: 'offsetry-arm/1',
    name: 'Test arm TA-6m',
    convention: 'mdh',
    joints: [
      { name: 'J1', type: 'revolute', a: 0, alpha: 0, d: 420, theta: 0, min: -170, max: 170 },
      { name: 'J2', type: 'revolute', a: 150, alpha: -90, d: 0, theta: -90, min: -120, max: 80 },
      { name: 'J3', type: 'revolute', a: 610, alpha: 0, d: 0, theta: 0, beta: 0, min: -110, max: 150 },
      { name: 'J4', type: 'revolute', a: 115, alpha: -90, d: 640, theta: 0, min: -180, max: 180 },
      { name: 'J5', type: 'revolute', a: 0, alpha: 90, d: 0, theta: 0, min: -120, max: 120 },
      { name: 'J6', type: 'revolute', a: 0, alpha: -90, d: 105, theta: 0, min: -350, max: 350 },
    ],
    tool: { x: 12, y: -8, z: 135, rx: 0, ry: 0, rz: 0 },
  };
}

/** Invented four-axis arm with a prismatic axis and all axes parallel (SCARA-like layout), DH. */
export function fourAxisParallel(): ArmGeometry {
  return {
    format: 'offsetry-arm/1',
    name: 'Test arm TS-4',
    convention: 'dh',
    joints: [
      { name: 'J1', type: 'revolute', a: 325, alpha: 0, d: 380, theta: 0, min: -140, max: 140 },
      { name: 'J2', type: 'revolute', a: 275, alpha: 0, d: 0, theta: 0, min: -145, max: 145 },
      { name: 'J3', type: 'prismatic', a: 0, alpha: 0, d: 0, theta: 0, min: -150, max: 0 },
      { name: 'J4', type: 'revolute', a: 0, alpha: 0, d: -40, theta: 0, min: -360, max: 360 },
    ],
    tool: { x: 30, y: 0, z: -60, rx: 0, ry: 0, rz: 0 },
  };
}

export function randomQ(g: ArmGeometry, r: () => number): number[] {
  return g.joints.map((j) => {
    const lo = j.min ?? -180, hi = j.max ?? 180;
    return lo + (hi - lo) * r();
  });
}

/** A session measured on `truth` at random poses, with Gaussian noise of `sigma` mm per coordinate. */
export function synthSession(truth: ArmGeometry, count: number, sigma: number, seed: number): SessionPose[] {
  const r = rng(seed);
  const poses: SessionPose[] = [];
  for (let k = 0; k < count; k++) {
    const q = randomQ(truth, r);
    const p = forwardPoint(truth, q);
    poses.push({
      label: `P${k + 1}`, line: k + 2, q,
      x: p[0] + sigma * gaussian(r), y: p[1] + sigma * gaussian(r), z: p[2] + sigma * gaussian(r),
    });
  }
  return poses;
}

/** A "true" arm: the nominal with invented manufacturing errors (0.1–1 mm, 0.01–0.1 deg) and a tracker base. */
export function perturbed(nominal: ArmGeometry, seed: number, scale = 1): ArmGeometry {
  const r = rng(seed);
  const s = () => (2 * r() - 1) * scale;
  return {
    ...nominal,
    joints: nominal.joints.map((j) => ({
      ...j,
      a: j.a + 0.8 * s(), alpha: j.alpha + 0.08 * s(), d: j.d + 0.8 * s(), theta: j.theta + 0.08 * s(),
      ...(j.beta !== undefined ? { beta: j.beta + 0.05 * s() } : {}),
    })),
    base: { x: 2500 + 5 * s(), y: -800 + 5 * s(), z: -300 + 5 * s(), rx: 0.4 * s(), ry: 0.3 * s(), rz: 35 + 2 * s() },
    tool: { ...nominal.tool!, x: nominal.tool!.x + 0.5 * s(), y: nominal.tool!.y + 0.5 * s(), z: nominal.tool!.z + 0.5 * s() },
  };
}
