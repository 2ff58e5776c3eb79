/**
 * Residuals of every pose before and after the fit (measured − predicted, mm), and the standardised
 * residuals that flag outliers (validation.ts: leverage from the solution's normal matrix).
 */
import type { SessionPose } from './types';
import { forwardKinematics, setParameters, type ArmData, type ArmModel } from './kinematics';
import { pointJacobian, predictPoints, type PoseBuffers } from './jacobian';
import { leverageFactor, standardisedResidual, type PoseRole } from './validation';
import type { PoseResidual } from './fit-report';

export interface PoseResiduals {
  poses: PoseResidual[];
  /** 3-D error |measured − predicted| of every pose, nominal geometry (registered base) and calibrated (mm). */
  errBefore: Float64Array;
  errAfter: Float64Array;
}

/**
 * Residuals of all poses `all` at v0 (before) and at the solution v (after). `A` is the normal matrix of
 * the identified parameters `active` at v, `sigma` the residual σ̂; with `studentise` false (singular
 * covariance) no pose gets a standardised residual.
 */
export function poseResiduals(
  model: ArmModel, data: ArmData, all: PoseBuffers, poses: SessionPose[], roles: PoseRole[],
  v0: Float64Array, v: Float64Array, active: Int32Array, A: Float64Array, sigma: number, studentise: boolean, threshold: number,
): PoseResiduals {
  const n = model.n, p = active.length;
  const J = new Float64Array(3 * p);
  const before = new Float64Array(3 * all.count), after = new Float64Array(3 * all.count);
  const errBefore = new Float64Array(all.count), errAfter = new Float64Array(all.count);
  predictPoints(model, data, v0, all, before, errBefore);
  const lev = studentise ? leverageFactor(A, p) : null;
  // Standardised residuals (NaN = none). With a leverage factor, one pass at the solution gives both the
  // predicted point and its Jacobian, so the calibrated points need no separate prediction pass.
  const standardised = new Float64Array(all.count).fill(NaN);
  if (lev) {
    setParameters(model, data, v);
    const tmp = new Float64Array(3 * p);
    const e = new Float64Array(3);
    const fk = forwardKinematics, jac = pointJacobian, studentised = standardisedResidual;
    const pt = data.point, mm = all.measured;
    const at = { offset: 0, withDerivatives: true, jointCos: all.cq, jointSin: all.sq };
    for (let i = 0; i < all.count; i++) {
      at.offset = i * n;
      fk(model, data, all.q, at);
      const px = pt[0], py = pt[1], pz = pt[2];
      after[3 * i] = px; after[3 * i + 1] = py; after[3 * i + 2] = pz;
      e[0] = mm[3 * i] - px; e[1] = mm[3 * i + 1] - py; e[2] = mm[3 * i + 2] - pz;
      errAfter[i] = Math.hypot(e[0], e[1], e[2]);
      jac(model, data, active, J);
      // Robust weights scale a fit pose's information; the studentisation uses the unweighted residual.
      const s = studentised(e, J, lev, p, sigma, roles[i] === 'fit' ? -1 : 1, tmp);
      if (s !== null) standardised[i] = s;
    }
  } else {
    predictPoints(model, data, v, all, after, errAfter);
  }
  const meas = all.measured;
  const poseReports: PoseResidual[] = new Array(all.count);
  for (let i = 0; i < all.count; i++) {
    const pose = poses[i];
    const x = meas[3 * i], y = meas[3 * i + 1], z = meas[3 * i + 2];
    const si = standardised[i];
    const s = si === si ? si : null;
    poseReports[i] = {
      label: pose.label, line: pose.line, role: roles[i],
      before: [x - before[3 * i], y - before[3 * i + 1], z - before[3 * i + 2]],
      after: [x - after[3 * i], y - after[3 * i + 1], z - after[3 * i + 2]],
      errorBefore: errBefore[i], errorAfter: errAfter[i], standardised: s, outlier: s !== null && s > threshold,
    };
  }
  return { poses: poseReports, errBefore, errAfter };
}
