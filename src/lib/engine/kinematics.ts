/**
 * Forward kinematics of a serial chain (the conventions of the geometry file, README), split into
 *   - a model (ArmModel): the fixed description, compiled once from an ArmGeometry;
 *   - data (ArmData): working buffers allocated once per model and reused across poses and iterations;
 *   - free functions (setParameters, forwardKinematics, pointJacobian) that fill the data.
 *
 * Conventions, exactly as the geometry file defines them:
 *   "dh":  A_i = Rz(theta_i + q_i)·Tz(d_i)·Tx(a_i)·Rx(alpha_i)·Ry(beta_i)
 *   "mdh": A_i = Rx(alpha_i)·Tx(a_i)·Ry(beta_i)·Rz(theta_i + q_i)·Tz(d_i)
 *   prismatic: q_i adds to d_i instead of theta_i.  B and T = Txyz·Rz·Ry·Rx.
 *   pose = B·A_1⋯A_n·T; the measured point is its translation (in the measurement frame).
 *
 * While walking the chain the data also records, for every parameter, how it moves the point: each
 * parameter is one elementary motion of the chain, either a translation along a unit axis u (dp/ds = u)
 * or a rotation about an axis u through a pivot c (dp/ds = u × (p − c)), with u and c in the
 * measurement frame. That is the analytic Jacobian (the screw form used for kinematic calibration,
 * e.g. Hollerbach & Wampler 1996), evaluated in jacobian.ts without any per-pose matrix objects.
 */
import type { ArmGeometry, Convention } from './types';
import { DEG, geometryToVector, parameterLayout, type ParameterLayout } from './parameters';
import { FRAME_FIELDS, FRAME_SIZE, FRAME_SLOT, JOINT_SLOT, JOINT_STRIDE, baseOffset, jointOffset, toolOffset } from './layout';

// Local copies of the layout's joint stride and slots for the per-pose loop: imported bindings can be
// getters after transpilation (tsx), which costs a call per use (as in jacobian.ts).
const STRIDE = JOINT_STRIDE;
const SLOT_A = JOINT_SLOT.a, SLOT_ALPHA = JOINT_SLOT.alpha, SLOT_D = JOINT_SLOT.d, SLOT_THETA = JOINT_SLOT.theta, SLOT_BETA = JOINT_SLOT.beta;

/** How a parameter moves the point: 0 not at all, 1 translation along axis, 2 rotation about axis through pivot. */
export const MOTION_NONE = 0;
export const MOTION_TRANSLATION = 1;
export const MOTION_ROTATION = 2;

export interface ArmModel {
  readonly convention: Convention;
  /** Number of joints. */
  readonly n: number;
  /** 1 for prismatic joints. */
  readonly prismatic: Uint8Array;
  readonly layout: ParameterLayout;
  /** Length of the parameter vector, 5n + 12. */
  readonly size: number;
  /** Motion kind of each parameter (MOTION_*), fixed by the layout. */
  readonly motion: Uint8Array;
  /** Nominal parameter vector (mm, rad) of the compiled geometry. */
  readonly nominal: Float64Array;
}

export interface ArmData {
  /** Current parameter vector (mm, rad); set through setParameters. */
  readonly v: Float64Array;
  /** cos/sin of alpha_i and beta_i for the current vector. */
  readonly ca: Float64Array;
  readonly sa: Float64Array;
  readonly cb: Float64Array;
  readonly sb: Float64Array;
  /** cos/sin of theta_i for the current vector (used with per-pose cos/sin of q by angle addition). */
  readonly ct: Float64Array;
  readonly st: Float64Array;
  /** Base rotation (row-major 3×3) and origin in the measurement frame. */
  readonly baseR: Float64Array;
  /** Measured point of the last forwardKinematics call, measurement frame (mm). */
  readonly point: Float64Array;
  /** Per parameter j: axis u at 3j (unit, measurement frame) and pivot c at 3j (mm). */
  readonly axis: Float64Array;
  readonly pivot: Float64Array;
  /**
   * Meaning of the base rotation columns of the Jacobian. false (default): derivatives with respect to
   * the file's angles rx, ry, rz (Z-Y-X), singular at ry = ±90°. true: derivatives with respect to a small
   * rotation about the measurement frame's x, y, z axes through the base origin, applied as
   * B ← Exp([δ]×)·B (see rotations.ts); regular at every orientation. The fit uses true.
   */
  baseIncrements: boolean;
}

export function compileArm(geometry: ArmGeometry): ArmModel {
  const layout = parameterLayout(geometry);
  const n = geometry.joints.length;
  const prismatic = new Uint8Array(n);
  geometry.joints.forEach((j, i) => (prismatic[i] = j.type === 'prismatic' ? 1 : 0));
  const motion = new Uint8Array(layout.size);
  for (let i = 0; i < n; i++) {
    const p = jointOffset(i);
    motion[p + JOINT_SLOT.a] = MOTION_TRANSLATION;
    motion[p + JOINT_SLOT.alpha] = MOTION_ROTATION;
    motion[p + JOINT_SLOT.d] = MOTION_TRANSLATION;
    motion[p + JOINT_SLOT.theta] = MOTION_ROTATION;
    motion[p + JOINT_SLOT.beta] = MOTION_ROTATION;
  }
  const b = baseOffset(n), t = toolOffset(n);
  for (const field of FRAME_FIELDS) {
    const k = FRAME_SLOT[field], rotation = k >= FRAME_SLOT.rx;
    motion[b + k] = rotation ? MOTION_ROTATION : MOTION_TRANSLATION;
    // The tool rotation does not move the tool point.
    motion[t + k] = rotation ? MOTION_NONE : MOTION_TRANSLATION;
  }
  return { convention: geometry.convention, n, prismatic, layout, size: layout.size, motion, nominal: geometryToVector(geometry) };
}

export function createArmData(model: ArmModel): ArmData {
  const n = model.n;
  const data: ArmData = {
    v: new Float64Array(model.size),
    ca: new Float64Array(n),
    sa: new Float64Array(n),
    cb: new Float64Array(n),
    sb: new Float64Array(n),
    ct: new Float64Array(n),
    st: new Float64Array(n),
    baseR: new Float64Array(9),
    point: new Float64Array(3),
    axis: new Float64Array(3 * model.size),
    pivot: new Float64Array(3 * model.size),
    baseIncrements: false,
  };
  setParameters(model, data, model.nominal);
  return data;
}

/** Load a parameter vector (mm, rad) into the data: constant trigonometry and the base frame. */
export function setParameters(model: ArmModel, data: ArmData, v: ArrayLike<number>): void {
  const n = model.n;
  const dv = data.v;
  for (let j = 0; j < model.size; j++) dv[j] = v[j];
  for (let i = 0; i < n; i++) {
    const p = STRIDE * i;
    data.ca[i] = Math.cos(dv[p + SLOT_ALPHA]);
    data.sa[i] = Math.sin(dv[p + SLOT_ALPHA]);
    data.cb[i] = Math.cos(dv[p + SLOT_BETA]);
    data.sb[i] = Math.sin(dv[p + SLOT_BETA]);
    data.ct[i] = Math.cos(dv[p + SLOT_THETA]);
    data.st[i] = Math.sin(dv[p + SLOT_THETA]);
  }
  const b = baseOffset(n);
  const bx = b + FRAME_SLOT.x, by = b + FRAME_SLOT.y, bz = b + FRAME_SLOT.z;
  const brx = b + FRAME_SLOT.rx, bry = b + FRAME_SLOT.ry, brz = b + FRAME_SLOT.rz;
  const cx = Math.cos(dv[brx]), sx = Math.sin(dv[brx]);
  const cy = Math.cos(dv[bry]), sy = Math.sin(dv[bry]);
  const cz = Math.cos(dv[brz]), sz = Math.sin(dv[brz]);
  // R = Rz(rz)·Ry(ry)·Rx(rx), row-major.
  const R = data.baseR;
  R[0] = cz * cy; R[1] = cz * sy * sx - sz * cx; R[2] = cz * sy * cx + sz * sx;
  R[3] = sz * cy; R[4] = sz * sy * sx + cz * cx; R[5] = sz * sy * cx - cz * sx;
  R[6] = -sy;     R[7] = cy * sx;                R[8] = cy * cx;
  // Base motions do not depend on the pose: translations along the measurement axes; rz about the
  // measurement z, ry about Rz·e_y, rx about Rz·Ry·e_x, all through the base origin.
  const ax = data.axis, pv = data.pivot;
  for (let k = 0; k < FRAME_SIZE; k++) {
    const j = 3 * (b + k);
    pv[j] = dv[bx]; pv[j + 1] = dv[by]; pv[j + 2] = dv[bz];
  }
  ax.fill(0, 3 * b, 3 * (b + FRAME_SIZE));
  ax[3 * bx] = 1; ax[3 * by + 1] = 1; ax[3 * bz + 2] = 1;
  ax[3 * brz + 2] = 1;
  if (data.baseIncrements) {
    // Small rotations about the measurement x, y, z axes.
    ax[3 * brx] = 1; ax[3 * bry + 1] = 1;
  } else {
    ax[3 * bry] = -sz; ax[3 * bry + 1] = cz;
    ax[3 * brx] = cz * cy; ax[3 * brx + 1] = sz * cy; ax[3 * brx + 2] = -sy;
  }
  // Tool rotations do not move the point.
  const t = toolOffset(n);
  ax.fill(0, 3 * (t + FRAME_SLOT.rx), 3 * (t + FRAME_SIZE));
}

/** What forwardKinematics reads besides the joint values, and what it records besides the point. */
export interface ForwardKinematicsOptions {
  /** Where this pose's n joint values start in q (and in jointCos / jointSin): many poses share one flat array. Default 0. */
  offset?: number;
  /** Also record every parameter's axis and pivot (data.axis, data.pivot: what pointJacobian reads). Default false. */
  withDerivatives?: boolean;
  /** Receives the 4×4 row-major frames base, joint 1 … joint n, tool in the measurement frame (length 16·(n + 2)). */
  frames?: Float64Array;
  /**
   * cos and sin of every joint value at the same offsets as q (jointTrig): the joint angle's cos/sin then
   * come from the angle-addition formulas instead of two transcendental calls per joint and pose.
   */
  jointCos?: Float64Array;
  jointSin?: Float64Array;
}

/**
 * Forward kinematics of one pose. q in internal units (rad for revolute, mm for prismatic), n values from
 * options.offset. Fills data.point, and what the options ask for. Loops over many poses pass one options
 * object and move its offset, so the call allocates nothing.
 */
export function forwardKinematics(model: ArmModel, data: ArmData, q: ArrayLike<number>, options: ForwardKinematicsOptions = {}): void {
  const qOffset = options.offset ?? 0;
  const derivatives = options.withDerivatives ?? false;
  const frames = options.frames, cq = options.jointCos, sq = options.jointSin;
  const n = model.n;
  const v = data.v, ca = data.ca, sa = data.sa, cb = data.cb, sb = data.sb, pr = model.prismatic;
  const ax = data.axis, pv = data.pivot;
  const B = data.baseR;
  const b = baseOffset(n);
  // Current frame: columns x, y, z of the rotation and origin o, all in the measurement frame.
  let xx = B[0], xy = B[3], xz = B[6];
  let yx = B[1], yy = B[4], yz = B[7];
  let zx = B[2], zy = B[5], zz = B[8];
  let ox = v[b], oy = v[b + 1], oz = v[b + 2];
  if (frames) writeFrame(frames, 0, xx, xy, xz, yx, yy, yz, zx, zy, zz, ox, oy, oz);
  const dh = model.convention === 'dh';
  for (let i = 0; i < n; i++) {
    const p = STRIDE * i;
    const qi = q[qOffset + i];
    const theta = v[p + SLOT_THETA], d = v[p + SLOT_D];
    const phi = pr[i] ? theta : theta + qi;
    const dd = pr[i] ? d + qi : d;
    const a = v[p + SLOT_A];
    // Where this joint's parameters keep their axis and pivot (3 numbers each).
    const uA = 3 * (p + SLOT_A), uAlpha = 3 * (p + SLOT_ALPHA), uD = 3 * (p + SLOT_D);
    const uTheta = 3 * (p + SLOT_THETA), uBeta = 3 * (p + SLOT_BETA);
    let c: number, s: number;
    if (pr[i]) {
      c = data.ct[i];
      s = data.st[i];
    } else if (cq && sq) {
      // cos(θ + q), sin(θ + q) by angle addition.
      const cqi = cq[qOffset + i], sqi = sq[qOffset + i], cti = data.ct[i], sti = data.st[i];
      c = cti * cqi - sti * sqi;
      s = sti * cqi + cti * sqi;
    } else {
      c = Math.cos(phi);
      s = Math.sin(phi);
    }
    const cA = ca[i], sA = sa[i], cB = cb[i], sB = sb[i];
    if (dh) {
      if (derivatives) {
        // theta: about z_{i-1} through o_{i-1}; d: along z_{i-1}.
        ax[uTheta] = zx; ax[uTheta + 1] = zy; ax[uTheta + 2] = zz;
        pv[uTheta] = ox; pv[uTheta + 1] = oy; pv[uTheta + 2] = oz;
        ax[uD] = zx; ax[uD + 1] = zy; ax[uD + 2] = zz;
      }
      // Rz(phi)
      const x1x = c * xx + s * yx, x1y = c * xy + s * yy, x1z = c * xz + s * yz;
      const y1x = c * yx - s * xx, y1y = c * yy - s * xy, y1z = c * yz - s * xz;
      // Tz(d)·Tx(a)
      ox += dd * zx + a * x1x; oy += dd * zy + a * x1y; oz += dd * zz + a * x1z;
      // Rx(alpha)
      const y2x = cA * y1x + sA * zx, y2y = cA * y1y + sA * zy, y2z = cA * y1z + sA * zz;
      const z2x = cA * zx - sA * y1x, z2y = cA * zy - sA * y1y, z2z = cA * zz - sA * y1z;
      if (derivatives) {
        // a: along x'; alpha: about x' through o_i; beta: about y'' through o_i.
        ax[uA] = x1x; ax[uA + 1] = x1y; ax[uA + 2] = x1z;
        ax[uAlpha] = x1x; ax[uAlpha + 1] = x1y; ax[uAlpha + 2] = x1z;
        pv[uAlpha] = ox; pv[uAlpha + 1] = oy; pv[uAlpha + 2] = oz;
        ax[uBeta] = y2x; ax[uBeta + 1] = y2y; ax[uBeta + 2] = y2z;
        pv[uBeta] = ox; pv[uBeta + 1] = oy; pv[uBeta + 2] = oz;
      }
      // Ry(beta)
      xx = cB * x1x - sB * z2x; xy = cB * x1y - sB * z2y; xz = cB * x1z - sB * z2z;
      zx = sB * x1x + cB * z2x; zy = sB * x1y + cB * z2y; zz = sB * x1z + cB * z2z;
      yx = y2x; yy = y2y; yz = y2z;
    } else {
      if (derivatives) {
        // alpha: about x_{i-1} through o_{i-1}; a: along x_{i-1}.
        ax[uAlpha] = xx; ax[uAlpha + 1] = xy; ax[uAlpha + 2] = xz;
        pv[uAlpha] = ox; pv[uAlpha + 1] = oy; pv[uAlpha + 2] = oz;
        ax[uA] = xx; ax[uA + 1] = xy; ax[uA + 2] = xz;
      }
      // Rx(alpha)
      const y1x = cA * yx + sA * zx, y1y = cA * yy + sA * zy, y1z = cA * yz + sA * zz;
      const z1x = cA * zx - sA * yx, z1y = cA * zy - sA * yy, z1z = cA * zz - sA * yz;
      // Tx(a)
      ox += a * xx; oy += a * xy; oz += a * xz;
      // Ry(beta)
      const x2x = cB * xx - sB * z1x, x2y = cB * xy - sB * z1y, x2z = cB * xz - sB * z1z;
      const z2x = sB * xx + cB * z1x, z2y = sB * xy + cB * z1y, z2z = sB * xz + cB * z1z;
      if (derivatives) {
        // beta: about y' through o'; theta: about z'' through o'; d: along z''.
        ax[uBeta] = y1x; ax[uBeta + 1] = y1y; ax[uBeta + 2] = y1z;
        pv[uBeta] = ox; pv[uBeta + 1] = oy; pv[uBeta + 2] = oz;
        ax[uTheta] = z2x; ax[uTheta + 1] = z2y; ax[uTheta + 2] = z2z;
        pv[uTheta] = ox; pv[uTheta + 1] = oy; pv[uTheta + 2] = oz;
        ax[uD] = z2x; ax[uD + 1] = z2y; ax[uD + 2] = z2z;
      }
      // Rz(phi)
      xx = c * x2x + s * y1x; xy = c * x2y + s * y1y; xz = c * x2z + s * y1z;
      yx = c * y1x - s * x2x; yy = c * y1y - s * x2y; yz = c * y1z - s * x2z;
      zx = z2x; zy = z2y; zz = z2z;
      // Tz(d)
      ox += dd * zx; oy += dd * zy; oz += dd * zz;
    }
    if (frames) writeFrame(frames, 16 * (i + 1), xx, xy, xz, yx, yy, yz, zx, zy, zz, ox, oy, oz);
  }
  const t = toolOffset(n);
  const tx = v[t], ty = v[t + 1], tz = v[t + 2];
  const pX = ox + tx * xx + ty * yx + tz * zx;
  const pY = oy + tx * xy + ty * yy + tz * zy;
  const pZ = oz + tx * xz + ty * yz + tz * zz;
  data.point[0] = pX; data.point[1] = pY; data.point[2] = pZ;
  if (derivatives) {
    // Tool point: along the flange axes.
    ax[3 * t] = xx; ax[3 * t + 1] = xy; ax[3 * t + 2] = xz;
    ax[3 * t + 3] = yx; ax[3 * t + 4] = yy; ax[3 * t + 5] = yz;
    ax[3 * t + 6] = zx; ax[3 * t + 7] = zy; ax[3 * t + 8] = zz;
  }
  if (frames) {
    // Tool frame: flange·Txyz·Rz·Ry·Rx.
    const cx = Math.cos(v[t + 3]), sx = Math.sin(v[t + 3]);
    const cy = Math.cos(v[t + 4]), sy = Math.sin(v[t + 4]);
    const cz = Math.cos(v[t + 5]), sz = Math.sin(v[t + 5]);
    const r = [cz * cy, cz * sy * sx - sz * cx, cz * sy * cx + sz * sx, sz * cy, sz * sy * sx + cz * cx, sz * sy * cx - cz * sx, -sy, cy * sx, cy * cx];
    const F = [xx, yx, zx, xy, yy, zy, xz, yz, zz];
    const o = 16 * (n + 1);
    for (let r0 = 0; r0 < 3; r0++) {
      for (let c0 = 0; c0 < 3; c0++) {
        frames[o + 4 * r0 + c0] = F[3 * r0] * r[c0] + F[3 * r0 + 1] * r[3 + c0] + F[3 * r0 + 2] * r[6 + c0];
      }
    }
    frames[o + 3] = pX; frames[o + 7] = pY; frames[o + 11] = pZ;
    frames[o + 12] = 0; frames[o + 13] = 0; frames[o + 14] = 0; frames[o + 15] = 1;
  }
}

function writeFrame(
  f: Float64Array, o: number,
  xx: number, xy: number, xz: number, yx: number, yy: number, yz: number, zx: number, zy: number, zz: number,
  ox: number, oy: number, oz: number,
): void {
  f[o] = xx; f[o + 1] = yx; f[o + 2] = zx; f[o + 3] = ox;
  f[o + 4] = xy; f[o + 5] = yy; f[o + 6] = zy; f[o + 7] = oy;
  f[o + 8] = xz; f[o + 9] = yz; f[o + 10] = zz; f[o + 11] = oz;
  f[o + 12] = 0; f[o + 13] = 0; f[o + 14] = 0; f[o + 15] = 1;
}

/** cos and sin of every joint value (internal units; prismatic entries unused) for forwardKinematics. */
export function jointTrig(q: Float64Array): { cq: Float64Array; sq: Float64Array } {
  const cq = new Float64Array(q.length), sq = new Float64Array(q.length);
  for (let k = 0; k < q.length; k++) {
    cq[k] = Math.cos(q[k]);
    sq[k] = Math.sin(q[k]);
  }
  return { cq, sq };
}

/** Joint readings at the boundary (deg for revolute, mm for prismatic) → internal (rad, mm), into `out`. */
export function jointsToInternal(model: ArmModel, q: ArrayLike<number>, out: Float64Array, offset = 0): void {
  for (let i = 0; i < model.n; i++) out[offset + i] = model.prismatic[i] ? q[i] : q[i] * DEG;
}

/** Convenience: the measured point of a geometry at joint readings q (deg / mm). Allocates; not for loops. */
export function forwardPoint(geometry: ArmGeometry, qDegOrMm: number[]): [number, number, number] {
  const model = compileArm(geometry);
  const data = createArmData(model);
  const q = new Float64Array(model.n);
  jointsToInternal(model, qDegOrMm, q);
  forwardKinematics(model, data, q);
  return [data.point[0], data.point[1], data.point[2]];
}

/** 4×4 row-major frames base, joint 1 … joint n, tool, in the measurement frame (for drawing). q in deg / mm. */
export function forwardFrames(geometry: ArmGeometry, q: number[]): number[][] {
  const model = compileArm(geometry);
  const data = createArmData(model);
  const qi = new Float64Array(model.n);
  jointsToInternal(model, q, qi);
  const frames = new Float64Array(16 * (model.n + 2));
  forwardKinematics(model, data, qi, { frames });
  const out: number[][] = [];
  for (let k = 0; k < model.n + 2; k++) out.push(Array.from(frames.subarray(16 * k, 16 * k + 16)));
  return out;
}
