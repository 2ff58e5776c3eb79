/**
 * Poses and per-pose results in columns for the hop between the request process and an engine thread:
 * a 100 000-pose session as a handful of typed arrays (copied as blocks) instead of 100 000 small objects
 * (each cloned one by one, about half a second each way on this machine). Packing and unpacking are exact:
 * the same numbers, labels and order come out as went in.
 */
import type { PoseResidual } from '../engine/fit-report';
import type { PoseRole } from '../engine/validation';
import type { SessionPose } from '../engine/types';

export interface PackedPoses {
  n: number;
  joints: number;
  labels: string[];
  lines: Int32Array;
  /** Joint readings, pose after pose. */
  q: Float64Array;
  /** x, y, z of each pose in turn. */
  xyz: Float64Array;
  /** 0 none, 1 'fit', 2 'validate'. */
  split: Uint8Array;
}

const SPLITS = [undefined, 'fit', 'validate'] as const;

export function packPoses(poses: readonly SessionPose[]): PackedPoses {
  const n = poses.length;
  const joints = poses[0]?.q.length ?? 0;
  const out: PackedPoses = { n, joints, labels: new Array<string>(n), lines: new Int32Array(n), q: new Float64Array(n * joints), xyz: new Float64Array(3 * n), split: new Uint8Array(n) };
  poses.forEach((p, i) => {
    // A pose whose joint count differs from the first cannot be packed in this layout: the engine's own
    // input check reports it, so such a list travels unpacked (see unpackPoses' caller).
    out.labels[i] = p.label;
    out.lines[i] = p.line;
    for (let k = 0; k < joints; k++) out.q[i * joints + k] = p.q[k]!;
    out.xyz[3 * i] = p.x;
    out.xyz[3 * i + 1] = p.y;
    out.xyz[3 * i + 2] = p.z;
    out.split[i] = p.split === 'fit' ? 1 : p.split === 'validate' ? 2 : 0;
  });
  return out;
}

/** True when every pose has the first pose's joint count (the only layout packPoses keeps exactly). */
export function packable(poses: readonly SessionPose[]): boolean {
  const joints = poses[0]?.q.length ?? 0;
  return poses.every((p) => p.q.length === joints);
}

export function unpackPoses(p: PackedPoses): SessionPose[] {
  const out = new Array<SessionPose>(p.n);
  for (let i = 0; i < p.n; i++) {
    const split = SPLITS[p.split[i]!];
    out[i] = {
      label: p.labels[i]!,
      line: p.lines[i]!,
      q: Array.from(p.q.subarray(i * p.joints, (i + 1) * p.joints)),
      x: p.xyz[3 * i]!,
      y: p.xyz[3 * i + 1]!,
      z: p.xyz[3 * i + 2]!,
      ...(split ? { split } : {}),
    };
  }
  return out;
}

export interface PackedResiduals {
  n: number;
  labels: string[];
  lines: Int32Array;
  roles: PoseRole[];
  before: Float64Array;
  after: Float64Array;
  errorBefore: Float64Array;
  errorAfter: Float64Array;
  /** NaN stands for null (no standardised residual). */
  standardised: Float64Array;
  outlier: Uint8Array;
}

export function packResiduals(poses: readonly PoseResidual[]): PackedResiduals {
  const n = poses.length;
  const out: PackedResiduals = {
    n, labels: new Array<string>(n), lines: new Int32Array(n), roles: new Array<PoseRole>(n),
    before: new Float64Array(3 * n), after: new Float64Array(3 * n), errorBefore: new Float64Array(n), errorAfter: new Float64Array(n),
    standardised: new Float64Array(n), outlier: new Uint8Array(n),
  };
  poses.forEach((p, i) => {
    out.labels[i] = p.label;
    out.lines[i] = p.line;
    out.roles[i] = p.role;
    out.before.set(p.before, 3 * i);
    out.after.set(p.after, 3 * i);
    out.errorBefore[i] = p.errorBefore;
    out.errorAfter[i] = p.errorAfter;
    out.standardised[i] = p.standardised ?? NaN;
    out.outlier[i] = p.outlier ? 1 : 0;
  });
  return out;
}

export function unpackResiduals(p: PackedResiduals): PoseResidual[] {
  const out = new Array<PoseResidual>(p.n);
  for (let i = 0; i < p.n; i++) {
    const s = p.standardised[i]!;
    out[i] = {
      label: p.labels[i]!,
      line: p.lines[i]!,
      role: p.roles[i]!,
      before: [p.before[3 * i]!, p.before[3 * i + 1]!, p.before[3 * i + 2]!],
      after: [p.after[3 * i]!, p.after[3 * i + 1]!, p.after[3 * i + 2]!],
      errorBefore: p.errorBefore[i]!,
      errorAfter: p.errorAfter[i]!,
      standardised: Number.isNaN(s) ? null : s,
      outlier: p.outlier[i] === 1,
    };
  }
  return out;
}
