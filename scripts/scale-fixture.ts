/**
 * A large invented session for the scale benchmark and the scale tests: an invented six-axis arm (Tarn R6-420,
 * no real product's parameters), its "true" geometry with small invented errors in an invented tracker
 * placement, and N poses measured with 15 µm noise, written as the session CSV the upload takes.
 * A few poses carry a 2 mm bump (known outliers) at fixed positions. Reproducible from the seed.
 */
import { forwardPoint } from '../src/lib/engine/kinematics';
import { normalVariate, seededRandom } from '../src/lib/engine/random';
import type { ArmGeometry } from '../src/lib/engine/types';

export function scaleNominal(): ArmGeometry {
  return {
    format: 'offsetry-arm/1',
    name: 'Tarn R6-420 (invented test arm)',
    convention: 'mdh',
    joints: [
      { name: 'J1', type: 'revolute', a: 0, alpha: 0, d: 350, theta: 0, min: -160, max: 160 },
      { name: 'J2', type: 'revolute', a: 75, alpha: -90, d: 0, theta: -90, min: -100, max: 80 },
      { name: 'J3', type: 'revolute', a: 420, alpha: 0, d: 0, theta: 0, beta: 0, min: -90, max: 130 },
      { name: 'J4', type: 'revolute', a: 35, alpha: -90, d: 410, theta: 0, min: -170, max: 170 },
      { name: 'J5', type: 'revolute', a: 0, alpha: 90, d: 0, theta: 0, min: -110, max: 110 },
      { name: 'J6', type: 'revolute', a: 0, alpha: -90, d: 80, theta: 0, min: -330, max: 330 },
    ],
    tool: { x: 0, y: 0, z: 95, rx: 0, ry: 0, rz: 0 },
  };
}

/** Invented errors of the "true" arm per joint, [Δa mm, Δα °, Δd mm, Δθ °] (shared with tests/support/arms.ts). */
export const scaleJointErrors: readonly (readonly [number, number, number, number])[] = [
  [0, 0, 0, 0],
  [0.18, -0.025, 0, 0.038],
  [-0.29, 0.021, 0, -0.031],
  [0.12, 0.03, -0.22, 0.045],
  [-0.07, -0.035, 0, -0.021],
  [0, 0.019, 0.14, 0],
];

/** The invented tracker placement of the "true" arm (its base frame in the measurement frame). */
export const scaleTrackerBase = { x: 1820.5, y: -512.3, z: -244.9, rx: 0.09, ry: -0.06, rz: 21.4 } as const;

function scaleTrue(): ArmGeometry {
  const g = scaleNominal();
  g.joints.forEach((j, i) => {
    const [da, dal, dd, dth] = scaleJointErrors[i]!;
    j.a += da;
    j.alpha += dal;
    j.d += dd;
    j.theta += dth;
  });
  g.base = { ...scaleTrackerBase };
  g.tool = { x: 0.35, y: -0.27, z: 95.48, rx: 0, ry: 0, rz: 0 };
  return g;
}

/** 0-based positions of the bumped poses (2 mm on x) in a session of n poses. */
export const bumpedPositions = (n: number) => [Math.floor(n * 0.1) + 3, Math.floor(n * 0.55) + 1, n - 2];

/** The session CSV (header pose,q1..q6,x,y,z); pose labels P000001…, joints to 4 decimals, points to 5. */
export function scaleSessionCsv(n: number, seed = 17): string {
  const r = seededRandom(seed);
  const truth = scaleTrue();
  const nominal = scaleNominal();
  const bumped = new Set(bumpedPositions(n));
  const noise = () => 0.015 * normalVariate(r);
  const lines = ['pose,q1,q2,q3,q4,q5,q6,x,y,z'];
  for (let i = 0; i < n; i++) {
    const q = nominal.joints.map((j) => Number((j.min! * 0.8 + (j.max! - j.min!) * 0.8 * r()).toFixed(4)));
    const p = forwardPoint(truth, q);
    const bump = bumped.has(i) ? 2 : 0;
    lines.push([`P${String(i + 1).padStart(6, '0')}`, ...q, (p[0] + noise() + bump).toFixed(5), (p[1] + noise()).toFixed(5), (p[2] + noise()).toFixed(5)].join(','));
  }
  return lines.join('\n') + '\n';
}
