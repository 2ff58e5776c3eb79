/**
 * Analytic Jacobian of the measured point with respect to the geometric parameters.
 *
 * After forwardKinematics(…, derivatives = true) every parameter j has an axis u_j and a pivot c_j
 * (measurement frame). Its column is u_j for a translation and u_j × (p − c_j) for a rotation
 * (units mm/mm and mm/rad). Checked against central finite differences in tests/engine/jacobian.test.ts.
 */
import { MOTION_ROTATION, MOTION_TRANSLATION, forwardKinematics, setParameters, type ArmData, type ArmModel } from './kinematics';

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
    if (kind === MOTION_ROTATION) {
      const ux = ax[o], uy = ax[o + 1], uz = ax[o + 2];
      const rx = px - pv[o], ry = py - pv[o + 1], rz = pz - pv[o + 2];
      out[3 * k] = uy * rz - uz * ry;
      out[3 * k + 1] = uz * rx - ux * rz;
      out[3 * k + 2] = ux * ry - uy * rx;
    } else if (kind === MOTION_TRANSLATION) {
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
  return { count, q, measured, weights };
}

/**
 * Predicted points of every pose for the full parameter vector v into `out` (xyz per pose), and the
 * 3-D errors |measured − predicted| into `errors` when given.
 */
export function predictPoints(model: ArmModel, data: ArmData, v: ArrayLike<number>, poses: PoseBuffers, out: Float64Array, errors?: Float64Array): void {
  setParameters(model, data, v);
  const n = model.n, pt = data.point, m = poses.measured;
  for (let i = 0; i < poses.count; i++) {
    forwardKinematics(model, data, poses.q, i * n);
    out[3 * i] = pt[0];
    out[3 * i + 1] = pt[1];
    out[3 * i + 2] = pt[2];
    if (errors) errors[i] = Math.hypot(m[3 * i] - pt[0], m[3 * i + 1] - pt[1], m[3 * i + 2] - pt[2]);
  }
}

/**
 * Normal equations of the point residuals r_i = predicted_i − measured_i over the parameters `active`
 * (indices into the full vector v): A += Σ w_i J_iᵀJ_i (upper triangle, p×p row-major), g += Σ w_i J_iᵀ r_i.
 * A and g are cleared first. Returns ½ Σ w_i |r_i|². One pass, no per-pose allocation.
 */
export function accumulateNormalEquations(
  model: ArmModel, data: ArmData, v: ArrayLike<number>, poses: PoseBuffers, active: Int32Array,
  A: Float64Array, g: Float64Array, J: Float64Array,
): number {
  setParameters(model, data, v);
  const p = active.length, n = model.n, pt = data.point, m = poses.measured, w = poses.weights;
  A.fill(0);
  g.fill(0);
  let cost = 0;
  for (let i = 0; i < poses.count; i++) {
    const wi = w[i];
    if (wi === 0) continue;
    forwardKinematics(model, data, poses.q, i * n, true);
    pointJacobian(model, data, active, J);
    const r0 = pt[0] - m[3 * i], r1 = pt[1] - m[3 * i + 1], r2 = pt[2] - m[3 * i + 2];
    cost += wi * (r0 * r0 + r1 * r1 + r2 * r2);
    for (let a = 0; a < p; a++) {
      const j0 = wi * J[3 * a], j1 = wi * J[3 * a + 1], j2 = wi * J[3 * a + 2];
      g[a] += j0 * r0 + j1 * r1 + j2 * r2;
      const row = a * p;
      for (let b = a, o = 3 * a; b < p; b++, o += 3) {
        A[row + b] += j0 * J[o] + j1 * J[o + 1] + j2 * J[o + 2];
      }
    }
  }
  return 0.5 * cost;
}

/** Mirror the upper triangle of a p×p row-major matrix into the lower one. */
export function symmetrize(A: Float64Array, p: number): void {
  for (let a = 0; a < p; a++) for (let b = a + 1; b < p; b++) A[b * p + a] = A[a * p + b];
}
