/**
 * The parameter vector of an arm: every geometric quantity the engine can identify, in one flat layout
 * (where each entry lives and its key: layout.ts).
 *
 * Groups (the order screens show them): lengths (a, d), twists (alpha), offsets (theta: the joint zero),
 * beta (Hayati's twist about y), base (6), tool (x, y, z). A prismatic joint adds q to d, so for it d is the
 * joint zero (group offsets) and theta is a fixed angle of the link (group twists).
 * Tool rotations never change the measured point (the point is the tool frame's origin), so they are
 * carried for drawing and files but never identified.
 */
import type { ArmGeometry, FrameSpec, ParameterGroup } from './types';
import { PARAMETER_GROUPS } from './types';
import {
  FRAME_FIELDS, JOINT_FIELDS, baseOffset, baseParam, frameKey, jointKey, jointParam, parameterCount, toolOffset, toolParam,
  type JointField,
} from './layout';

export const DEG = Math.PI / 180;

export interface ParameterInfo {
  /** Index in the flat vector. */
  index: number;
  key: string;
  /** Joint name from the geometry file (joints only). */
  joint?: string;
  /** Joint index, 0-based (joints only). */
  jointIndex?: number;
  /** Field name: a, alpha, d, theta, beta, x, y, z, rx, ry, rz. */
  name: string;
  /** 'joint' | 'base' | 'tool'. */
  owner: 'joint' | 'base' | 'tool';
  group: ParameterGroup | 'tool-rotation';
  /** Unit at the boundary; internal values are mm or rad. */
  unit: 'mm' | 'deg';
  /** True when the parameter can be identified by default (the identification rules of the README). */
  defaultIdentified: boolean;
}

export interface ParameterLayout {
  jointCount: number;
  size: number;
  baseOffset: number;
  toolOffset: number;
  params: ParameterInfo[];
  byKey: Map<string, ParameterInfo>;
}

const ZERO_FRAME: FrameSpec = { x: 0, y: 0, z: 0, rx: 0, ry: 0, rz: 0 };

function jointGroup(field: JointField, prismatic: boolean): ParameterGroup {
  switch (field) {
    case 'a':
      return 'lengths';
    case 'd':
      return prismatic ? 'offsets' : 'lengths';
    case 'alpha':
      return 'twists';
    case 'theta':
      return prismatic ? 'twists' : 'offsets';
    case 'beta':
      return 'beta';
  }
}

export function parameterLayout(geometry: ArmGeometry): ParameterLayout {
  const n = geometry.joints.length;
  const params: ParameterInfo[] = [];
  geometry.joints.forEach((joint, i) => {
    const prismatic = joint.type === 'prismatic';
    JOINT_FIELDS.forEach((field) => {
      const isAngle = field === 'alpha' || field === 'beta' || field === 'theta';
      params.push({
        index: jointParam(i, field),
        key: jointKey(i, field),
        joint: joint.name,
        jointIndex: i,
        name: field,
        owner: 'joint',
        group: jointGroup(field, prismatic),
        unit: isAngle ? 'deg' : 'mm',
        defaultIdentified: field !== 'beta' || joint.beta !== undefined,
      });
    });
  });
  FRAME_FIELDS.forEach((field, k) => {
    params.push({
      index: baseParam(n, field),
      key: frameKey('base', field),
      name: field,
      owner: 'base',
      group: 'base',
      unit: k < 3 ? 'mm' : 'deg',
      defaultIdentified: true,
    });
  });
  FRAME_FIELDS.forEach((field, k) => {
    params.push({
      index: toolParam(n, field),
      key: frameKey('tool', field),
      name: field,
      owner: 'tool',
      group: k < 3 ? 'tool' : 'tool-rotation',
      unit: k < 3 ? 'mm' : 'deg',
      defaultIdentified: k < 3,
    });
  });
  return {
    jointCount: n,
    size: parameterCount(n),
    baseOffset: baseOffset(n),
    toolOffset: toolOffset(n),
    params,
    byKey: new Map(params.map((p) => [p.key, p])),
  };
}

/** Internal value (mm / rad) → boundary value (mm / deg). */
export function toReportUnit(info: ParameterInfo, value: number): number {
  return info.unit === 'deg' ? value / DEG : value;
}

/** Boundary value (mm / deg) → internal value (mm / rad). */
export function fromReportUnit(info: ParameterInfo, value: number): number {
  return info.unit === 'deg' ? value * DEG : value;
}

/** The flat vector (mm, rad) of a geometry; absent base/tool/beta are zeros. */
export function geometryToVector(geometry: ArmGeometry, base: FrameSpec | undefined = geometry.base): Float64Array {
  const n = geometry.joints.length;
  const v = new Float64Array(parameterCount(n));
  geometry.joints.forEach((j, i) => {
    v[jointParam(i, 'a')] = j.a;
    v[jointParam(i, 'alpha')] = j.alpha * DEG;
    v[jointParam(i, 'd')] = j.d;
    v[jointParam(i, 'theta')] = j.theta * DEG;
    v[jointParam(i, 'beta')] = (j.beta ?? 0) * DEG;
  });
  writeFrame(v, baseOffset(n), base ?? ZERO_FRAME);
  writeFrame(v, toolOffset(n), geometry.tool ?? ZERO_FRAME);
  return v;
}

/** A frame (mm, deg) into the six entries starting at o (mm, rad). */
function writeFrame(v: Float64Array, o: number, f: FrameSpec): void {
  v[o] = f.x;
  v[o + 1] = f.y;
  v[o + 2] = f.z;
  v[o + 3] = f.rx * DEG;
  v[o + 4] = f.ry * DEG;
  v[o + 5] = f.rz * DEG;
}

/** The frame (mm, deg) in the six entries starting at o (mm, rad). */
export function readFrame(v: ArrayLike<number>, o: number): FrameSpec {
  return { x: v[o], y: v[o + 1], z: v[o + 2], rx: v[o + 3] / DEG, ry: v[o + 4] / DEG, rz: v[o + 5] / DEG };
}

/**
 * A geometry carrying the values of `v` (full precision). Joint `beta` is written only where the
 * nominal lists it; base and tool are always filled in.
 */
export function vectorToGeometry(nominal: ArmGeometry, v: ArrayLike<number>): ArmGeometry {
  const n = nominal.joints.length;
  return {
    ...nominal,
    joints: nominal.joints.map((j, i) => {
      const out = {
        ...j, a: v[jointParam(i, 'a')], alpha: v[jointParam(i, 'alpha')] / DEG, d: v[jointParam(i, 'd')], theta: v[jointParam(i, 'theta')] / DEG,
      };
      if (j.beta !== undefined) out.beta = v[jointParam(i, 'beta')] / DEG;
      else delete out.beta;
      return out;
    }),
    base: readFrame(v, baseOffset(n)),
    tool: readFrame(v, toolOffset(n)),
  };
}

/**
 * The candidate parameters for identification: default-identified parameters whose group is chosen.
 * `groups` defaults to every group. Tool rotations and unlisted betas are never candidates.
 */
export function candidateParameters(layout: ParameterLayout, groups: readonly ParameterGroup[] = PARAMETER_GROUPS): ParameterInfo[] {
  const chosen = new Set<string>(groups);
  return layout.params.filter((p) => p.defaultIdentified && chosen.has(p.group));
}

/**
 * Characteristic length (mm) used to make angle columns comparable with length columns in the
 * observability indices: an angle error of δ rad moves the point by about L·δ mm
 * (scaling by a characteristic length, Hollerbach & Wampler 1996). L = sum of |a|, |d| and the tool offset.
 */
export function characteristicLength(geometry: ArmGeometry): number {
  let L = 0;
  for (const j of geometry.joints) L += Math.abs(j.a) + Math.abs(j.d);
  const t = geometry.tool;
  if (t) L += Math.hypot(t.x, t.y, t.z);
  return L > 1 ? L : 1000;
}
