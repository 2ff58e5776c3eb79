/**
 * Analytic Jacobian of the measured point with respect to the geometric parameters.
 *
 * After forwardKinematics(…, { withDerivatives: true }) every parameter j has an axis u_j and a pivot c_j
 * (measurement frame). Its column is u_j for a translation and u_j × (p − c_j) for a rotation
 * (units mm/mm and mm/rad). Checked against central finite differences in tests/engine/jacobian.test.ts.
 */
import { forwardKinematics, jointTrig, setParameters, type ArmData, type ArmModel } from './kinematics';

// Local copies of kinematics' MOTION_TRANSLATION / MOTION_ROTATION: imported bindings can be getters
// after transpilation (tsx), which costs a call per use inside the per-pose loops.
const TRANSLATION = 1;
const ROTATION = 2;

/**
 * Columns `cols` of the 3 × P point Jacobian of the last forwardKinematics call, into `out` interleaved
 * by column: out[3k + r] = ∂p_r / ∂v[cols[k]]. Precondition: forwardKinematics ran with derivatives.
 */
export function pointJacobian(model: ArmModel, data: ArmData, cols: ArrayLike<number>, out: Float64Array): void {
  const ax = data.axis, pv = data.pivot, motion = model.motion;
  const px = data.point[0], py = data.point[1], pz = data.point[2];
  for (let k = 0, m = cols.length; k < m; k++) {
    const j = cols[k];
    const o = 3 * j;
    const kind = motion[j];
    if (kind === ROTATION) {
      const ux = ax[o], uy = ax[o + 1], uz = ax[o + 2];
      const rx = px - pv[o], ry = py - pv[o + 1], rz = pz - pv[o + 2];
      out[3 * k] = uy * rz - uz * ry;
      out[3 * k + 1] = uz * rx - ux * rz;
      out[3 * k + 2] = ux * ry - uy * rx;
    } else if (kind === TRANSLATION) {
      out[3 * k] = ax[o];
      out[3 * k + 1] = ax[o + 1];
      out[3 * k + 2] = ax[o + 2];
    } else {
      out[3 * k] = 0;
      out[3 * k + 1] = 0;
      out[3 * k + 2] = 0;
    }
  }
}

/**
 * Poses in flat buffers: joint readings (internal units, n per pose), measured points (xyz per pose)
 * and a weight per pose (1 = ordinary; weights multiply the pose's three squared residuals).
 */
export interface PoseBuffers {
  count: number;
  q: Float64Array;
  /** cos and sin of q (computed once; forward kinematics then needs no trigonometry per pose). */
  cq: Float64Array;
  sq: Float64Array;
  measured: Float64Array;
  weights: Float64Array;
}

export function poseBuffers(model: ArmModel, poses: { q: ArrayLike<number>; x: number; y: number; z: number; weight?: number }[]): PoseBuffers {
  const count = poses.length;
  const q = new Float64Array(count * model.n);
  const measured = new Float64Array(count * 3);
  const weights = new Float64Array(count);
  poses.forEach((p, i) => {
    for (let k = 0; k < model.n; k++) q[i * model.n + k] = model.prismatic[k] ? p.q[k] : (p.q[k] * Math.PI) / 180;
    measured[3 * i] = p.x;
    measured[3 * i + 1] = p.y;
    measured[3 * i + 2] = p.z;
    weights[i] = p.weight ?? 1;
  });
  return { count, q, ...jointTrig(q), measured, weights };
}

/**
 * Predicted points of every pose for the full parameter vector v into `out` (xyz per pose), and the
 * 3-D errors |measured − predicted| into `errors` when given.
 */
export function predictPoints(model: ArmModel, data: ArmData, v: ArrayLike<number>, poses: PoseBuffers, out: Float64Array, errors?: Float64Array): void {
  setParameters(model, data, v);
  const n = model.n, pt = data.point, m = poses.measured;
  const fk = forwardKinematics;
  const at = { offset: 0, jointCos: poses.cq, jointSin: poses.sq };
  for (let i = 0; i < poses.count; i++) {
    at.offset = i * n;
    fk(model, data, poses.q, at);
    out[3 * i] = pt[0];
    out[3 * i + 1] = pt[1];
    out[3 * i + 2] = pt[2];
    if (errors) errors[i] = Math.hypot(m[3 * i] - pt[0], m[3 * i + 1] - pt[1], m[3 * i + 2] - pt[2]);
  }
}

/** Poses per block of the normal-equation accumulation (3 rows each): keeps the block in L1 cache. */
const BLOCK = 32;

/** Work buffers of accumulateNormalEquations for p parameters; allocate once, reuse. */
export interface NormalWork {
  p: number;
  /** p rounded up to a multiple of 3 (the 3×3 tiles); padding columns stay zero. */
  pp: number;
  /** Block Jacobian, column-major by parameter: Jb[a·R + r], R = 3·BLOCK rows (√w-scaled). */
  Jb: Float64Array;
  /** Block residuals (√w-scaled). */
  rb: Float64Array;
  /** Padded normal matrix pp×pp (upper tiles). */
  Ap: Float64Array;
}

export function normalWork(p: number): NormalWork {
  const pp = 3 * Math.ceil(p / 3);
  return { p, pp, Jb: new Float64Array(pp * 3 * BLOCK), rb: new Float64Array(3 * BLOCK), Ap: new Float64Array(pp * pp) };
}

/**
 * Normal equations of the point residuals r_i = predicted_i − measured_i over the parameters `active`
 * (indices into the full vector v): A = Σ w_i J_iᵀJ_i (upper triangle, p×p row-major), g = Σ w_i J_iᵀ r_i.
 * Returns ½ Σ w_i |r_i|². One pass; Jacobian rows of BLOCK poses are gathered column-major so that each
 * entry of A is one contiguous dot product per block (no per-pose allocation, no full Jacobian).
 */
export function accumulateNormalEquations(
  model: ArmModel, data: ArmData, v: ArrayLike<number>, poses: PoseBuffers, active: Int32Array,
  A: Float64Array, g: Float64Array, work: NormalWork,
): number {
  setParameters(model, data, v);
  const p = active.length, n = model.n, pt = data.point, m = poses.measured, w = poses.weights;
  const motion = model.motion, ax = data.axis, pv = data.pivot;
  const R = 3 * BLOCK, Jb = work.Jb, rb = work.rb;
  const fk = forwardKinematics;
  const at = { offset: 0, withDerivatives: true, jointCos: poses.cq, jointSin: poses.sq };
  const pp = work.pp, Ap = work.Ap;
  Ap.fill(0);
  g.fill(0);
  let cost = 0;
  let rows = 0;
  for (let i = 0; i < poses.count; i++) {
    const wi = w[i];
    if (wi === 0) continue;
    at.offset = i * n;
    fk(model, data, poses.q, at);
    const sw = wi === 1 ? 1 : Math.sqrt(wi);
    const px = pt[0], py = pt[1], pz = pt[2];
    const r0 = px - m[3 * i], r1 = py - m[3 * i + 1], r2 = pz - m[3 * i + 2];
    cost += wi * (r0 * r0 + r1 * r1 + r2 * r2);
    rb[rows] = sw * r0; rb[rows + 1] = sw * r1; rb[rows + 2] = sw * r2;
    for (let k = 0; k < p; k++) {
      const j = active[k];
      const o = 3 * j;
      const q = k * R + rows;
      const kind = motion[j];
      if (kind === ROTATION) {
        const ux = ax[o], uy = ax[o + 1], uz = ax[o + 2];
        const dx = px - pv[o], dy = py - pv[o + 1], dz = pz - pv[o + 2];
        Jb[q] = sw * (uy * dz - uz * dy);
        Jb[q + 1] = sw * (uz * dx - ux * dz);
        Jb[q + 2] = sw * (ux * dy - uy * dx);
      } else if (kind === TRANSLATION) {
        Jb[q] = sw * ax[o]; Jb[q + 1] = sw * ax[o + 1]; Jb[q + 2] = sw * ax[o + 2];
      } else {
        Jb[q] = 0; Jb[q + 1] = 0; Jb[q + 2] = 0;
      }
    }
    rows += 3;
    if (rows === R) {
      flushBlock(Jb, rb, rows, p, pp, R, Ap, g);
      rows = 0;
    }
  }
  if (rows > 0) flushBlock(Jb, rb, rows, p, pp, R, Ap, g);
  A.fill(0);
  for (let a = 0; a < p; a++) for (let b = a; b < p; b++) A[a * p + b] = Ap[a * pp + b];
  return 0.5 * cost;
}

/**
 * Ap += JbᵀJb (upper tiles of the padded pp×pp matrix) and g += Jbᵀrb over the first `rows` rows of a
 * block, in 3×3 register tiles: nine products per six loads. Padding columns of Jb are zero.
 */
function flushBlock(Jb: Float64Array, rb: Float64Array, rows: number, p: number, pp: number, R: number, Ap: Float64Array, g: Float64Array): void {
  for (let a = 0; a < p; a++) {
    const oa = a * R;
    let sg = 0;
    for (let r = 0; r < rows; r++) sg += Jb[oa + r] * rb[r];
    g[a] += sg;
  }
  for (let a = 0; a < pp; a += 3) {
    const o0 = a * R, o1 = o0 + R, o2 = o1 + R;
    for (let b = a; b < pp; b += 3) {
      const q0 = b * R, q1 = q0 + R, q2 = q1 + R;
      let s00 = 0, s01 = 0, s02 = 0, s10 = 0, s11 = 0, s12 = 0, s20 = 0, s21 = 0, s22 = 0;
      for (let r = 0; r < rows; r++) {
        const x0 = Jb[o0 + r], x1 = Jb[o1 + r], x2 = Jb[o2 + r];
        const y0 = Jb[q0 + r], y1 = Jb[q1 + r], y2 = Jb[q2 + r];
        s00 += x0 * y0; s01 += x0 * y1; s02 += x0 * y2;
        s10 += x1 * y0; s11 += x1 * y1; s12 += x1 * y2;
        s20 += x2 * y0; s21 += x2 * y1; s22 += x2 * y2;
      }
      const r0 = a * pp + b, r1 = r0 + pp, r2 = r1 + pp;
      Ap[r0] += s00; Ap[r0 + 1] += s01; Ap[r0 + 2] += s02;
      Ap[r1] += s10; Ap[r1 + 1] += s11; Ap[r1 + 2] += s12;
      Ap[r2] += s20; Ap[r2 + 1] += s21; Ap[r2 + 2] += s22;
    }
  }
}
