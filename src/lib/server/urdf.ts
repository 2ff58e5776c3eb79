/**
 * URDF writer: an arm geometry (offsetry-arm/1) as a URDF robot description whose joint origins carry the
 * geometry exactly (the calibrated one, for an export).
 *
 * URDF (the open robot-description XML format, wiki.ros.org/urdf/XML) composes a chain as
 *   child_frame = parent_frame · Origin(xyz, rpy) · Motion(q about / along axis)
 * with Origin = Txyz · Rz(yaw) · Ry(pitch) · Rx(roll) ("fixed-axis roll, pitch, yaw"), lengths in metres and
 * angles in radians. Our conventions (see src/lib/engine/kinematics.ts)
 *   dh:  A_i = Rz(theta_i + q_i)·Tz(d_i)·Tx(a_i)·Rx(alpha_i)·Ry(beta_i)
 *   mdh: A_i = Rx(alpha_i)·Tx(a_i)·Ry(beta_i)·Rz(theta_i + q_i)·Tz(d_i)     (prismatic: q adds to d)
 * are regrouped so every joint's motion is a rotation about / translation along its local z axis: the
 * constant factors after one joint's motion are carried forward into the next joint's origin. A product of
 * rigid transforms is one rigid transform, and xyz + rpy express every rigid transform, so one origin per
 * joint always suffices — no intermediate fixed joints are needed for dh or mdh. The tool (the target point
 * on the flange) is a fixed joint.
 *
 * Root: by default the URDF is rooted at the robot base (link "base"), which is what a controller or a
 * simulator expects. The tracker (measurement) frame of the calibration session is an explicit option
 * (`root: 'tracker'`): then a fixed joint "base_frame" places the base in the link "measurement".
 *
 * The document is built by xmlbuilder2 (attribute values escaped by the library, and written with
 * `wellFormed: true`, so an invalid name or comment throws instead of producing broken XML). Numbers are
 * written with full precision (the shortest decimal that reads back to the same double, ECMA-262
 * Number::toString).
 */
import { create } from 'xmlbuilder2';
import type { ArmGeometry, FrameSpec } from '../engine/types';

const DEG = Math.PI / 180;

/** 4×4 homogeneous transform, row-major. */
export type Mat4 = number[];

export const identity = (): Mat4 => [1, 0, 0, 0, 0, 1, 0, 0, 0, 0, 1, 0, 0, 0, 0, 1];

export function mul(a: Mat4, b: Mat4): Mat4 {
  const o = new Array<number>(16).fill(0);
  for (let r = 0; r < 4; r++) {
    for (let c = 0; c < 4; c++) {
      let s = 0;
      for (let k = 0; k < 4; k++) s += a[4 * r + k]! * b[4 * k + c]!;
      o[4 * r + c] = s;
    }
  }
  return o;
}

export const rotX = (t: number): Mat4 => {
  const c = Math.cos(t), s = Math.sin(t);
  return [1, 0, 0, 0, 0, c, -s, 0, 0, s, c, 0, 0, 0, 0, 1];
};
export const rotY = (t: number): Mat4 => {
  const c = Math.cos(t), s = Math.sin(t);
  return [c, 0, s, 0, 0, 1, 0, 0, -s, 0, c, 0, 0, 0, 0, 1];
};
export const rotZ = (t: number): Mat4 => {
  const c = Math.cos(t), s = Math.sin(t);
  return [c, -s, 0, 0, s, c, 0, 0, 0, 0, 1, 0, 0, 0, 0, 1];
};
export const trans = (x: number, y: number, z: number): Mat4 => [1, 0, 0, x, 0, 1, 0, y, 0, 0, 1, z, 0, 0, 0, 1];

/** Our frame convention (geometry file base/tool): Txyz · Rz(rz) · Ry(ry) · Rx(rx), mm and deg. */
export function frameMatrix(f: FrameSpec | undefined): Mat4 {
  if (!f) return identity();
  return mul(mul(mul(trans(f.x, f.y, f.z), rotZ((f.rz ?? 0) * DEG)), rotY((f.ry ?? 0) * DEG)), rotX((f.rx ?? 0) * DEG));
}

/**
 * Roll, pitch, yaw (rad) with R = Rz(yaw)·Ry(pitch)·Rx(roll), the URDF convention. Pitch from the first
 * column by atan2 (accurate near ±90°, unlike asin); at the singularity yaw = 0. Roll is then solved from
 * Ry(pitch)ᵀ·Rz(yaw)ᵀ·R, so the three angles reproduce R to rounding even when yaw is ill-determined.
 */
export function rpyOf(m: Mat4): [number, number, number] {
  const r00 = m[0]!, r10 = m[4]!, r20 = m[8]!;
  const h = Math.hypot(r00, r10);
  const pitch = Math.atan2(-r20, h);
  const yaw = h < 1e-15 ? 0 : Math.atan2(r10, r00);
  const rest = mul(mul(rotY(-pitch), rotZ(-yaw)), m);
  const roll = Math.atan2(rest[9]!, rest[5]!);
  return [roll, pitch, yaw];
}

/** Full-precision decimal; -0 written as 0. */
export const num = (x: number): string => {
  if (!Number.isFinite(x)) throw new Error(`cannot write ${x} into a URDF file`);
  return String(Object.is(x, -0) ? 0 : x);
};

/** Where the URDF tree starts: the robot base (default) or the tracker frame of the session. */
export type UrdfRoot = 'base' | 'tracker';
export const URDF_ROOTS: readonly UrdfRoot[] = ['base', 'tracker'];

/**
 * Text safe inside an XML comment: XML 1.0 forbids "--" inside a comment and a "-" right before its end
 * (w3.org/TR/xml, production [15]); runs of hyphens become one, and characters XML cannot carry at all
 * (controls other than tab / line feed / carriage return, lone surrogates) are dropped.
 */
export function commentSafe(s: string): string {
  return s
    .replace(/[^\t\n\r\x20-\ud7ff\ue000-\ufffd\u{10000}-\u{10ffff}]/gu, '')
    .replace(/-{2,}/g, '-')
    .replace(/-$/, '- ');
}

/**
 * Text for an attribute value. The builder escapes <, >, " and a bare &, but deliberately leaves anything
 * that looks like an entity reference ("&x;") as it is, which would let a name carry an entity into the
 * file; so every & is written as &amp; here first (the builder keeps "&amp;" as is). Characters XML cannot
 * carry are dropped.
 */
const attrSafe = (s: string) => s.replace(/[^\t\n\r\x20-\ud7ff\ue000-\ufffd\u{10000}-\u{10ffff}]/gu, '').replace(/&/g, '&amp;');

/** One URDF joint as the writer plans it (also used by tests to inspect the decomposition). */
export interface PlannedJoint {
  name: string;
  type: 'revolute' | 'prismatic' | 'continuous' | 'fixed';
  parent: string;
  child: string;
  /** Origin in the parent link frame, mm (converted to metres on writing). */
  origin: Mat4;
  /** Limits in URDF units (rad / m), when the geometry lists them. */
  lower?: number;
  upper?: number;
}

/** The chain of URDF joints for a geometry: base, one per arm joint, tool. */
export function planUrdfJoints(g: ArmGeometry, root: UrdfRoot = 'base'): PlannedJoint[] {
  const out: PlannedJoint[] = [];
  if (root === 'tracker') out.push({ name: 'base_frame', type: 'fixed', parent: 'measurement', child: 'base', origin: frameMatrix(g.base) });
  let carried = identity();
  let parent = 'base';
  g.joints.forEach((j, i) => {
    const prismatic = j.type === 'prismatic';
    const th = j.theta * DEG, al = j.alpha * DEG, be = (j.beta ?? 0) * DEG;
    let origin: Mat4;
    if (g.convention === 'dh') {
      if (prismatic) {
        origin = mul(mul(carried, rotZ(th)), trans(0, 0, j.d));
        carried = mul(mul(trans(j.a, 0, 0), rotX(al)), rotY(be));
      } else {
        origin = mul(carried, rotZ(th));
        carried = mul(mul(mul(trans(0, 0, j.d), trans(j.a, 0, 0)), rotX(al)), rotY(be));
      }
    } else {
      const lead = mul(mul(mul(mul(carried, rotX(al)), trans(j.a, 0, 0)), rotY(be)), rotZ(th));
      if (prismatic) {
        origin = mul(lead, trans(0, 0, j.d));
        carried = identity();
      } else {
        origin = lead;
        carried = trans(0, 0, j.d);
      }
    }
    const child = `link_${i + 1}`;
    const limited = j.min !== undefined && j.max !== undefined;
    const scale = prismatic ? 1 / 1000 : DEG;
    out.push({
      name: j.name,
      // A revolute joint without limits in the geometry is URDF's "continuous" (no lower/upper).
      type: prismatic ? 'prismatic' : limited ? 'revolute' : 'continuous',
      parent,
      child,
      origin,
      lower: j.min !== undefined ? j.min * scale : undefined,
      upper: j.max !== undefined ? j.max * scale : undefined,
    });
    parent = child;
  });
  out.push({ name: 'tool_point', type: 'fixed', parent, child: 'tool', origin: mul(carried, frameMatrix(g.tool)) });
  return out;
}

export interface UrdfOptions {
  /** Robot name attribute; default the geometry's name. */
  robotName?: string;
  /** Lines for the leading XML comment (serial number, version …); made comment-safe. */
  comment?: string[];
  /** Root of the tree; default 'base' (the robot base), 'tracker' adds the measurement frame above it. */
  root?: UrdfRoot;
}

/** The URDF document text. Links carry no inertial/visual data: the file describes geometry only. */
export function geometryToUrdf(g: ArmGeometry, options: UrdfOptions = {}): string {
  const root = options.root ?? 'base';
  const joints = planUrdfJoints(g, root);
  const links = [...(root === 'tracker' ? ['measurement'] : []), 'base', ...g.joints.map((_, i) => `link_${i + 1}`), 'tool'];
  const doc = create({ version: '1.0', encoding: 'UTF-8' });
  if (options.comment?.length) doc.com('\n' + options.comment.map((c) => '  ' + commentSafe(c)).join('\n') + '\n');
  const robot = doc.ele('robot', { name: attrSafe(options.robotName ?? g.name) });
  for (const l of links) robot.ele('link', { name: l });
  for (const j of joints) {
    const o = j.origin;
    const [roll, pitch, yaw] = rpyOf(o);
    const joint = robot.ele('joint', { name: attrSafe(j.name), type: j.type });
    joint.ele('parent', { link: j.parent });
    joint.ele('child', { link: j.child });
    joint.ele('origin', { xyz: [o[3]! / 1000, o[7]! / 1000, o[11]! / 1000].map(num).join(' '), rpy: [roll, pitch, yaw].map(num).join(' ') });
    if (j.type !== 'fixed') {
      joint.ele('axis', { xyz: '0 0 1' });
      if (j.type !== 'continuous') {
        // effort and velocity are required attributes of <limit>; Offsetry carries geometry only, so they are 0
        // and the integrator fills in the drive's values (README, "Export files").
        const limit: Record<string, string> = {};
        if (j.lower !== undefined) limit.lower = num(j.lower);
        if (j.upper !== undefined) limit.upper = num(j.upper);
        joint.ele('limit', { ...limit, effort: '0', velocity: '0' });
      }
    }
  }
  return doc.end({ prettyPrint: true, indent: '  ', wellFormed: true }) + '\n';
}
