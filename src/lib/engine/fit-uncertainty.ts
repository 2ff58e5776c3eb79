/**
 * Uncertainty of the identified parameters at the solution: the linearised covariance (uncertainty.ts)
 * or, with a robust loss, the sandwich covariance; the base orientation's standard errors about the
 * measurement axes, and the covariance expressed in the file's base angles.
 */
import { forwardKinematics, setParameters, type ArmData, type ArmModel } from './kinematics';
import { pointJacobian, type PoseBuffers } from './jacobian';
import { DEG } from './parameters';
import { FRAME_SLOT } from './layout';
import { robustCurvature, robustWeight } from './lm';
import { multiplySquare, symmetrize } from './linalg';
import { sandwichCovariance, summariseCovariance, uncertainty, type Uncertainty } from './uncertainty';
import { invert3, zyxRateMatrix } from './rotations';
import { baseRotationPositions } from './fit-problem';
import type { ResolvedFitOptions } from './fit-options';

export interface FitUncertainty {
  /** Linearised uncertainty from the solver's last normal equations (σ̂ and, when regular, the covariance). */
  unc: Uncertainty;
  /** Standard errors (internal units) of the identified parameters; null where not defined. */
  standardErrors: (number | null)[];
  correlation: number[][];
  high: { a: number; b: number; r: number }[];
  /** deg, about the measurement x, y, z axes; null when the base rotation was not identified in increments. */
  baseRotationStandardErrors: [number, number, number] | null;
  /** Sentence appended to the uncertainty note when the file's base angles have no standard errors. */
  baseAnglesNote: string;
}

/**
 * Uncertainty of the parameters `active` at the solution v, from the solver's last normal equations A
 * and cost (they are those at the solution). `increments`: the base rotation was solved as small
 * rotations about the measurement axes.
 */
export function fitUncertainty(
  model: ArmModel, data: ArmData, v: Float64Array, fitPb: PoseBuffers, active: Int32Array,
  A: Float64Array, cost: number, increments: boolean, o: ResolvedFitOptions,
): FitUncertainty {
  const p = active.length;
  const m = 3 * fitPb.count;
  const unc = uncertainty(A, p, 2 * cost, m);
  let cov = unc.covariance;
  if (cov && o.robust !== 'none') cov = robustCovariance(model, data, v, fitPb, active, o.robust, o.robustScaleMm);
  // Standard errors of the base orientation about the measurement axes (the solver's coordinates), then
  // the covariance expressed in the file's angles: d(angles) = E⁻¹·ω (rotations.ts), where E is regular.
  const basePos = increments ? baseRotationPositions(model, active) : null;
  let baseRotationStandardErrors: [number, number, number] | null = null;
  let baseAnglesNote = '';
  let cal = cov;
  if (cov && basePos) {
    baseRotationStandardErrors = basePos.map((k) => Math.sqrt(cov![k * p + k]) / DEG) as [number, number, number];
    const b = model.layout.baseOffset;
    const Einv = invert3(zyxRateMatrix(v[b + FRAME_SLOT.ry], v[b + FRAME_SLOT.rz]), 1e-3);
    if (Einv) cal = transformBlock(cov, p, basePos, Einv);
    else {
      cal = null;
      baseAnglesNote = ' The base ry is within 0.06° of ±90° (a wall mount), where the file\'s angles rx and rz turn about the same axis: their standard errors are not defined, so the base orientation\'s standard errors are given about the measurement x, y, z axes instead.';
    }
  }
  const summary = cal ? summariseCovariance(cal, p) : cov ? summariseCovariance(cov, p) : { standardErrors: unc.standardErrors, correlation: unc.correlation, high: unc.high };
  const standardErrors = summary.standardErrors.map((se, k) => (!cal && cov && basePos?.includes(k) ? null : se));
  return { unc, standardErrors, correlation: summary.correlation, high: summary.high, baseRotationStandardErrors, baseAnglesNote };
}

/** T·Cov·Tᵀ where T is the identity except the 3×3 block M on the positions `pos`. */
function transformBlock(cov: Float64Array, p: number, pos: [number, number, number], M: Float64Array): Float64Array {
  const T = new Float64Array(p * p);
  for (let i = 0; i < p; i++) T[i * p + i] = 1;
  for (let r = 0; r < 3; r++) for (let c = 0; c < 3; c++) T[pos[r] * p + pos[c]] = M[3 * r + c];
  return multiplySquare(multiplySquare(T, cov, p), T, p, 'transposed');
}

/**
 * Sandwich covariance (uncertainty.ts, sandwichCovariance) of a robust fit at the solution v: one pass
 * over the fit poses accumulating the bread H = Σ J_iᵀ ∇²ρ(r_i) J_i and the meat B = Σ (J_iᵀψ_i)(J_iᵀψ_i)ᵀ.
 * Pose weights from the session (before the robust reweighting) multiply both.
 */
export function robustCovariance(
  model: ArmModel, data: ArmData, v: Float64Array, pb: PoseBuffers, active: Int32Array,
  robust: 'huber' | 'cauchy', k: number,
): Float64Array | null {
  const p = active.length, n = model.n;
  const H = new Float64Array(p * p), B = new Float64Array(p * p);
  const J = new Float64Array(3 * p), s = new Float64Array(p), hJ = new Float64Array(3 * p);
  setParameters(model, data, v);
  const pt = data.point, meas = pb.measured;
  let m = 0;
  const at = { offset: 0, withDerivatives: true, jointCos: pb.cq, jointSin: pb.sq };
  for (let i = 0; i < pb.count; i++) {
    at.offset = i * n;
    forwardKinematics(model, data, pb.q, at);
    const rx = pt[0] - meas[3 * i], ry = pt[1] - meas[3 * i + 1], rz = pt[2] - meas[3 * i + 2];
    const e = Math.hypot(rx, ry, rz);
    const w = robustWeight(robust, e, k);
    // The session's own weight: the robust reweighting has multiplied it into pb.weights, so divide it out.
    const base = w > 0 ? pb.weights[i] / w : 0;
    if (!(base > 0)) continue;
    m += 3;
    const c2 = robustCurvature(robust, e, k);
    const ux = e > 0 ? rx / e : 0, uy = e > 0 ? ry / e : 0, uz = e > 0 ? rz / e : 0;
    pointJacobian(model, data, active, J);
    // ψ = w·r; ∇²ρ = w·I + (ρ'' − w)·uuᵀ.
    for (let a = 0; a < p; a++) {
      const jx = J[3 * a], jy = J[3 * a + 1], jz = J[3 * a + 2];
      s[a] = base * w * (jx * rx + jy * ry + jz * rz);
      const ju = jx * ux + jy * uy + jz * uz;
      const t = (c2 - w) * ju;
      hJ[3 * a] = w * jx + t * ux; hJ[3 * a + 1] = w * jy + t * uy; hJ[3 * a + 2] = w * jz + t * uz;
    }
    for (let a = 0; a < p; a++) {
      const sa = s[a];
      const hx = hJ[3 * a], hy = hJ[3 * a + 1], hz = hJ[3 * a + 2];
      for (let b = a; b < p; b++) {
        B[a * p + b] += sa * s[b];
        H[a * p + b] += base * (hx * J[3 * b] + hy * J[3 * b + 1] + hz * J[3 * b + 2]);
      }
    }
  }
  symmetrize(H, p);
  symmetrize(B, p);
  return sandwichCovariance(H, B, p, m);
}
