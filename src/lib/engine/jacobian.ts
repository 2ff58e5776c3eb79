/**
 * Analytic Jacobian of the measured point with respect to the geometric parameters.
 *
 * After forwardKinematics(…, derivatives = true) every parameter j has an axis u_j and a pivot c_j
 * (measurement frame). Its column is u_j for a translation and u_j × (p − c_j) for a rotation
 * (units mm/mm and mm/rad). Checked against central finite differences in tests/engine/jacobian.test.ts.
 */
import { MOTION_ROTATION, MOTION_TRANSLATION, type ArmData, type ArmModel } from './kinematics';

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
