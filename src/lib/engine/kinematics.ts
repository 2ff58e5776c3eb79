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
    motion[5 * i] = MOTION_TRANSLATION; // a
    motion[5 * i + 1] = MOTION_ROTATION; // alpha
    motion[5 * i + 2] = MOTION_TRANSLATION; // d
    motion[5 * i + 3] = MOTION_ROTATION; // theta
    motion[5 * i + 4] = MOTION_ROTATION; // beta
  }
  for (let k = 0; k < 3; k++) {
    motion[5 * n + k] = MOTION_TRANSLATION;
    motion[5 * n + 3 + k] = MOTION_ROTATION;
    motion[5 * n + 6 + k] = MOTION_TRANSLATION;
    motion[5 * n + 9 + k] = MOTION_NONE; // tool rotation does not move the tool point
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
    data.ca[i] = Math.cos(dv[5 * i + 1]);
    data.sa[i] = Math.sin(dv[5 * i + 1]);
    data.cb[i] = Math.cos(dv[5 * i + 4]);
    data.sb[i] = Math.sin(dv[5 * i + 4]);
    data.ct[i] = Math.cos(dv[5 * i + 3]);
    data.st[i] = Math.sin(dv[5 * i + 3]);
  }
  const b = 5 * n;
  const cx = Math.cos(dv[b + 3]), sx = Math.sin(dv[b + 3]);
  const cy = Math.cos(dv[b + 4]), sy = Math.sin(dv[b + 4]);
  const cz = Math.cos(dv[b + 5]), sz = Math.sin(dv[b + 5]);
  // R = Rz(rz)·Ry(ry)·Rx(rx), row-major.
  const R = data.baseR;
  R[0] = cz * cy; R[1] = cz * sy * sx - sz * cx; R[2] = cz * sy * cx + sz * sx;
  R[3] = sz * cy; R[4] = sz * sy * sx + cz * cx; R[5] = sz * sy * cx - cz * sx;
  R[6] = -sy;     R[7] = cy * sx;                R[8] = cy * cx;
  // Base motions do not depend on the pose: translations along the measurement axes; rz about the
  // measurement z, ry about Rz·e_y, rx about Rz·Ry·e_x, all through the base origin.
  const ax = data.axis, pv = data.pivot;
  for (let k = 0; k < 6; k++) {
    const j = 3 * (b + k);
    pv[j] = dv[b]; pv[j + 1] = dv[b + 1]; pv[j + 2] = dv[b + 2];
  }
  ax.fill(0, 3 * b, 3 * (b + 6));
  ax[3 * b] = 1; ax[3 * (b + 1) + 1] = 1; ax[3 * (b + 2) + 2] = 1;
  ax[3 * (b + 5) + 2] = 1;
  if (data.baseIncrements) {
    // Small rotations about the measurement x, y, z axes.
    ax[3 * (b + 3)] = 1; ax[3 * (b + 4) + 1] = 1;
  } else {
    ax[3 * (b + 4)] = -sz; ax[3 * (b + 4) + 1] = cz;
    ax[3 * (b + 3)] = cz * cy; ax[3 * (b + 3) + 1] = sz * cy; ax[3 * (b + 3) + 2] = -sy;
  }
  ax.fill(0, 3 * (b + 9), 3 * (b + 12));
}

/**
 * Forward kinematics of one pose. q in internal units (rad for revolute, mm for prismatic), length n.
 * Fills data.point; with `derivatives` also every parameter's axis and pivot; with `frames` (length
 * 16·(n + 2)) the 4×4 row-major frames base, joint 1 … joint n, tool in the measurement frame.
 * With `cq`, `sq` (cos and sin of every q at the same offsets, see jointTrig) the joint angle's cos/sin
 * come from the angle-addition formulas instead of two transcendental calls per joint and pose.
 */
export function forwardKinematics(
  model: ArmModel,
  data: ArmData,
  q: ArrayLike<number>,
  qOffset = 0,
  derivatives = false,
  frames?: Float64Array,
  cq?: Float64Array,
  sq?: Float64Array,
): void {
  const n = model.n;
  const v = data.v, ca = data.ca, sa = data.sa, cb = data.cb, sb = data.sb, pr = model.prismatic;
  const ax = data.axis, pv = data.pivot;
  const B = data.baseR;
  const b = 5 * n;
  // Current frame: columns x, y, z of the rotation and origin o, all in the measurement frame.
  let xx = B[0], xy = B[3], xz = B[6];
  let yx = B[1], yy = B[4], yz = B[7];
  let zx = B[2], zy = B[5], zz = B[8];
  let ox = v[b], oy = v[b + 1], oz = v[b + 2];
  if (frames) writeFrame(frames, 0, xx, xy, xz, yx, yy, yz, zx, zy, zz, ox, oy, oz);
  const dh = model.convention === 'dh';
  for (let i = 0; i < n; i++) {
    const p = 5 * i;
    const qi = q[qOffset + i];
    const phi = pr[i] ? v[p + 3] : v[p + 3] + qi;
    const dd = pr[i] ? v[p + 2] + qi : v[p + 2];
    const a = v[p];
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
        ax[3 * p + 9] = zx; ax[3 * p + 10] = zy; ax[3 * p + 11] = zz;
        pv[3 * p + 9] = ox; pv[3 * p + 10] = oy; pv[3 * p + 11] = oz;
        ax[3 * p + 6] = zx; ax[3 * p + 7] = zy; ax[3 * p + 8] = zz;
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
        ax[3 * p] = x1x; ax[3 * p + 1] = x1y; ax[3 * p + 2] = x1z;
        ax[3 * p + 3] = x1x; ax[3 * p + 4] = x1y; ax[3 * p + 5] = x1z;
        pv[3 * p + 3] = ox; pv[3 * p + 4] = oy; pv[3 * p + 5] = oz;
        ax[3 * p + 12] = y2x; ax[3 * p + 13] = y2y; ax[3 * p + 14] = y2z;
        pv[3 * p + 12] = ox; pv[3 * p + 13] = oy; pv[3 * p + 14] = oz;
      }
      // Ry(beta)
      xx = cB * x1x - sB * z2x; xy = cB * x1y - sB * z2y; xz = cB * x1z - sB * z2z;
      zx = sB * x1x + cB * z2x; zy = sB * x1y + cB * z2y; zz = sB * x1z + cB * z2z;
      yx = y2x; yy = y2y; yz = y2z;
    } else {
      if (derivatives) {
        // alpha: about x_{i-1} through o_{i-1}; a: along x_{i-1}.
        ax[3 * p + 3] = xx; ax[3 * p + 4] = xy; ax[3 * p + 5] = xz;
        pv[3 * p + 3] = ox; pv[3 * p + 4] = oy; pv[3 * p + 5] = oz;
        ax[3 * p] = xx; ax[3 * p + 1] = xy; ax[3 * p + 2] = xz;
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
        ax[3 * p + 12] = y1x; ax[3 * p + 13] = y1y; ax[3 * p + 14] = y1z;
        pv[3 * p + 12] = ox; pv[3 * p + 13] = oy; pv[3 * p + 14] = oz;
        ax[3 * p + 9] = z2x; ax[3 * p + 10] = z2y; ax[3 * p + 11] = z2z;
        pv[3 * p + 9] = ox; pv[3 * p + 10] = oy; pv[3 * p + 11] = oz;
        ax[3 * p + 6] = z2x; ax[3 * p + 7] = z2y; ax[3 * p + 8] = z2z;
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
  const t = b + 6;
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
  forwardKinematics(model, data, qi, 0, false, frames);
  const out: number[][] = [];
  for (let k = 0; k < model.n + 2; k++) out.push(Array.from(frames.subarray(16 * k, 16 * k + 16)));
  return out;
}
