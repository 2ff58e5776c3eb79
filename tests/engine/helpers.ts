/**
 * Invented arms and seeded data for the engine tests. The arms are made up for Offsetry's tests
 * (no real product's parameters); the noise is tracker-like (0.01–0.03 mm per coordinate).
 */
import type { ArmGeometry, SessionPose } from '../../src/lib/engine/types';
import { forwardPoint } from '../../src/lib/engine/kinematics';
import { normalVariate, seededRandom } from '../../src/lib/engine/random';

// The invented arms are defined once in tests/support/arms.ts; the engine tests take them from here too.
export { fourAxisParallel, sixAxisDh, sixAxisMdh } from '../support/arms';

/** Seeded uniform generator (the engine's mulberry32), so every test run sees the same data. */
export const rng = seededRandom;

/** Standard normal deviate (the engine's Box–Muller helper). */
export const gaussian = normalVariate;

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
