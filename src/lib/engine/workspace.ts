/**
 * The predicted position difference of two geometries of one arm over its workspace: a seeded sample of joint
 * configurations within the joint limits, max / RMS / mean of |p_A − p_B| at the measured point. Used to
 * compare parameter sets of a unit and nominal against calibrated across a fleet.
 *
 * Positions are compared in each geometry's own robot base frame by default: a calibrated base is where the
 * robot stood in that session's tracker frame, which changes from visit to visit, so including it would
 * mostly measure where the tracker was. `includeBase` compares in the measurement frame instead.
 */
import { compileArm, createArmData, forwardKinematics, jointsToInternal } from './kinematics';
import { seededRandom } from './random';
import type { ArmGeometry } from './types';

/** Joint range used for sampling: the nominal's limits, else ±180° (revolute) or 0…500 mm (prismatic). */
export function jointRanges(nominal: ArmGeometry): [number, number][] {
  return nominal.joints.map((j) => [j.min ?? (j.type === 'prismatic' ? 0 : -180), j.max ?? (j.type === 'prismatic' ? 500 : 180)]);
}

export interface WorkspaceDifference {
  samples: number;
  seed: number;
  frame: 'robot base' | 'measurement';
  maxMm: number;
  rmsMm: number;
  meanMm: number;
  /** The configuration with the largest difference (deg / mm). */
  worstQ: number[];
}

/** Max / RMS of |p_A − p_B| over `samples` configurations drawn uniformly within `ranges`. */
export function workspaceDifference(
  a: ArmGeometry,
  b: ArmGeometry,
  ranges: [number, number][],
  options: { samples?: number; seed?: number; includeBase?: boolean } = {},
): WorkspaceDifference {
  const samples = options.samples ?? 2000;
  const seed = options.seed ?? 1;
  const strip = (g: ArmGeometry): ArmGeometry => (options.includeBase ? g : { ...g, base: undefined });
  const ma = compileArm(strip(a)), mb = compileArm(strip(b));
  if (ma.n !== mb.n || ma.n !== ranges.length) throw new Error('the two geometries have different joint counts');
  const da = createArmData(ma), db = createArmData(mb);
  const q = new Array<number>(ma.n);
  const qa = new Float64Array(ma.n), qb = new Float64Array(mb.n);
  const rnd = seededRandom(seed);
  let sum2 = 0, sum = 0, worst = -1, worstQ: number[] = [];
  for (let s = 0; s < samples; s++) {
    for (let i = 0; i < ma.n; i++) q[i] = ranges[i]![0] + (ranges[i]![1] - ranges[i]![0]) * rnd();
    jointsToInternal(ma, q, qa);
    jointsToInternal(mb, q, qb);
    forwardKinematics(ma, da, qa);
    forwardKinematics(mb, db, qb);
    const e = Math.hypot(da.point[0]! - db.point[0]!, da.point[1]! - db.point[1]!, da.point[2]! - db.point[2]!);
    sum += e;
    sum2 += e * e;
    if (e > worst) {
      worst = e;
      worstQ = q.slice();
    }
  }
  return { samples, seed, frame: options.includeBase ? 'measurement' : 'robot base', maxMm: worst, rmsMm: Math.sqrt(sum2 / samples), meanMm: sum / samples, worstQ };
}
