/**
 * What the IK says about each target (the statuses of ik.ts's header), in plain words: reached, or why
 * not — unreachable, outside the joint limits, a configuration jump from the previous target, near a
 * singularity.
 */
import type { ArmGeometry } from './types';

export type IkStatus = 'reached' | 'unreachable' | 'outside-limits' | 'singular' | 'jump';

export const IK_STATUSES: readonly IkStatus[] = ['reached', 'singular', 'jump', 'outside-limits', 'unreachable'];

export interface IkResult {
  status: IkStatus;
  /** Joint values found (deg for revolute, mm for prismatic). */
  q: number[];
  /** Remaining distance |p* − p| (mm). */
  positionError: number;
  /** Remaining orientation error (deg); 0 for position-only targets. */
  orientationError: number;
  iterations: number;
  /** Smallest singular value of the normalised Jacobian at q (dimensionless). */
  smallestSingularValue: number;
  /** For "outside-limits": the joint and the value it would need. */
  limit?: { joint: string; needed: number; min?: number; max?: number };
  /** For "jump": the joint and its change from the previous solution (deg / mm). */
  jump?: { joint: string; change: number };
  /** The status in plain words. */
  message: string;
}

export interface IkSeed {
  /** Start configuration (deg / mm). */
  q: ArrayLike<number>;
  /** The previous target's solution, for the jump check (deg / mm); absent ⇒ no check. */
  previous?: ArrayLike<number>;
  /** How far the program itself moves from the previous target (deg / mm per joint), subtracted before the jump check. */
  intendedChange?: ArrayLike<number>;
}

/** Thresholds of the jump and singularity checks (IkOptions). */
export interface IkThresholds {
  singularThreshold: number;
  jumpDegrees: number;
  jumpMillimetres: number;
}

/** The numbers of a result, without its status. */
export type IkMeasures = Pick<IkResult, 'q' | 'positionError' | 'orientationError' | 'iterations' | 'smallestSingularValue'>;

type Joint = ArmGeometry['joints'][number];

const fmt = (v: number, digits: number) => (Math.abs(v) > 0 && Math.abs(v) < Math.pow(10, -digits) ? v.toExponential(1) : v.toFixed(digits));
const unitOf = (j: Joint) => (j.type === 'prismatic' ? ' mm' : '°');

/** How far the closest configuration stays from the target: "0.123 mm" or "0.123 mm and 0.0100°" (orientation null: position only). */
export function distanceWords(positionMm: number, orientationDeg: number | null): string {
  return `${fmt(positionMm, 3)} mm${orientationDeg !== null ? ` and ${fmt(orientationDeg, 4)}°` : ''}`;
}

export function unreachable(base: IkMeasures, far: string): IkResult {
  return { ...base, status: 'unreachable', message: `unreachable: the closest configuration found stays ${far} from the target` };
}

/** Reachable only with `joint` at `needed` (deg / mm), beyond its limits; `base` is the bounded solution. */
export function outsideLimits(base: IkMeasures, j: Joint, needed: number, far: string): IkResult {
  const unit = unitOf(j);
  return {
    ...base, status: 'outside-limits',
    limit: { joint: j.name, needed, min: j.min, max: j.max },
    message: `outside joint limits: needs ${j.name} at ${fmt(needed, 4)}${unit} (limits ${j.min ?? '−∞'}…${j.max ?? '∞'}${unit}); within the limits the closest configuration found stays ${far} from the target`,
  };
}

/**
 * Status of a reached configuration base.q (deg / mm): a jump from the seed's previous solution (beyond
 * the threshold after the program's intended change) is reported before a singularity (it is the larger
 * motion on the cell), the message naming both; then singular; else reached.
 */
export function reachedStatus(base: IkMeasures, joints: Joint[], seed: IkSeed, o: IkThresholds): IkResult {
  const n = joints.length, q = base.q, sigma = base.smallestSingularValue;
  const singular = sigma < o.singularThreshold;
  const singularWords = `smallest singular value ${sigma.toPrecision(3)} (threshold ${o.singularThreshold})`;
  if (seed.previous) {
    let worst = -1, ratio = 1, change = 0;
    for (let i = 0; i < n; i++) {
      const d = q[i] - seed.previous[i] - (seed.intendedChange ? seed.intendedChange[i] : 0);
      const limit = joints[i].type === 'prismatic' ? o.jumpMillimetres : o.jumpDegrees;
      if (Math.abs(d) / limit > ratio) { ratio = Math.abs(d) / limit; worst = i; change = d; }
    }
    if (worst >= 0) {
      const j = joints[worst];
      const unit = unitOf(j);
      return {
        ...base, status: 'jump', jump: { joint: j.name, change },
        message: `configuration jump: ${j.name} changes by ${fmt(change, 4)}${unit} from the previous target (threshold ${j.type === 'prismatic' ? o.jumpMillimetres : o.jumpDegrees}${unit})${singular ? `; also near a singularity: ${singularWords}` : ''}`,
      };
    }
  }
  if (singular) {
    return { ...base, status: 'singular', message: `near a singularity: ${singularWords}; the joint values are ill-determined here` };
  }
  return { ...base, status: 'reached', message: 'reached' };
}
