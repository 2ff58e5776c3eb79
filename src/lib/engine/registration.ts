/**
 * Closed-form rigid registration of point sets: find R, t minimising Σ |R·p_i + t − q_i|².
 * Method: Kabsch (1976) / Arun, Huang & Blostein (1987) through the SVD of the cross-covariance
 * H = Σ (p_i − p̄)(q_i − q̄)ᵀ = U S Vᵀ, R = V·diag(1, 1, sign det(V Uᵀ))·Uᵀ — the sign guard keeps R a
 * proper rotation when the best orthogonal fit would be a reflection (Umeyama 1991). ml-matrix's SVD.
 */
import { Matrix, SingularValueDecomposition } from 'ml-matrix';
import type { FrameSpec } from './types';
import { EngineInputError } from './types';

export interface RigidTransform {
  /** Row-major 3×3 rotation. */
  R: number[];
  t: [number, number, number];
  /** RMS of the 3-D distances after registration (mm). */
  rms: number;
  /** True when the points were nearly collinear, so the rotation about their line is not determined. */
  degenerate: boolean;
  /** True when the unconstrained orthogonal fit was a reflection and the guard flipped it. */
  reflectionGuarded: boolean;
}

/** Points as flat xyz arrays (length 3n). */
export function kabsch(from: ArrayLike<number>, to: ArrayLike<number>, weights?: ArrayLike<number>): RigidTransform {
  const n = from.length / 3;
  if (n < 3 || to.length !== from.length) {
    throw new EngineInputError([{ message: `registration needs at least 3 matching points, got ${Math.min(n, to.length / 3)}` }]);
  }
  let W = 0;
  const pc = [0, 0, 0], qc = [0, 0, 0];
  for (let i = 0; i < n; i++) {
    const w = weights ? weights[i] : 1;
    W += w;
    for (let c = 0; c < 3; c++) {
      pc[c] += w * from[3 * i + c];
      qc[c] += w * to[3 * i + c];
    }
  }
  for (let c = 0; c < 3; c++) { pc[c] /= W; qc[c] /= W; }
  const h = [0, 0, 0, 0, 0, 0, 0, 0, 0];
  for (let i = 0; i < n; i++) {
    const w = weights ? weights[i] : 1;
    for (let r = 0; r < 3; r++) {
      const pr = w * (from[3 * i + r] - pc[r]);
      for (let c = 0; c < 3; c++) h[3 * r + c] += pr * (to[3 * i + c] - qc[c]);
    }
  }
  const H = new Matrix([h.slice(0, 3), h.slice(3, 6), h.slice(6, 9)]);
  const svd = new SingularValueDecomposition(H);
  const U = svd.leftSingularVectors, V = svd.rightSingularVectors, s = svd.diagonal;
  const VUt = V.mmul(U.transpose());
  const det = det3(VUt);
  const d = det < 0 ? -1 : 1;
  const D = Matrix.diag([1, 1, d]);
  const Rm = V.mmul(D).mmul(U.transpose());
  const R = Rm.to1DArray();
  const t: [number, number, number] = [0, 0, 0];
  for (let r = 0; r < 3; r++) t[r] = qc[r] - (R[3 * r] * pc[0] + R[3 * r + 1] * pc[1] + R[3 * r + 2] * pc[2]);
  let ss = 0;
  for (let i = 0; i < n; i++) {
    for (let r = 0; r < 3; r++) {
      const e = R[3 * r] * from[3 * i] + R[3 * r + 1] * from[3 * i + 1] + R[3 * r + 2] * from[3 * i + 2] + t[r] - to[3 * i + r];
      ss += e * e;
    }
  }
  return { R, t, rms: Math.sqrt(ss / n), degenerate: s[1] <= 1e-9 * s[0], reflectionGuarded: d < 0 };
}

function det3(m: Matrix): number {
  const a = m.to1DArray();
  return a[0] * (a[4] * a[8] - a[5] * a[7]) - a[1] * (a[3] * a[8] - a[5] * a[6]) + a[2] * (a[3] * a[7] - a[4] * a[6]);
}

/**
 * Frame Txyz(t)·Rz(rz)·Ry(ry)·Rx(rx) (mm, deg) of a rigid transform. With R = Rz·Ry·Rx:
 * R20 = −sin ry, R21 = cos ry sin rx, R22 = cos ry cos rx, R10 = sin rz cos ry, R00 = cos rz cos ry.
 */
export function transformToFrame(T: { R: ArrayLike<number>; t: ArrayLike<number> }): FrameSpec {
  const R = T.R;
  const ry = Math.atan2(-R[6], Math.hypot(R[0], R[3]));
  const rx = Math.atan2(R[7], R[8]);
  const rz = Math.atan2(R[3], R[0]);
  const k = 180 / Math.PI;
  return { x: T.t[0], y: T.t[1], z: T.t[2], rx: rx * k, ry: ry * k, rz: rz * k };
}
