/**
 * Rotations without singularities for the fit: the base orientation is solved as small rotation
 * increments ω (rad, about the measurement frame's x, y, z axes) about the current estimate,
 * B ← Exp([ω]×)·B, and converted to the file's Z-Y-X angles (R = Rz(rz)·Ry(ry)·Rx(rx)) only to store and
 * print them. The increment is regular at every orientation (the angles' rate matrix is singular at
 * ry = ±90°, a robot on a wall). Exp is Rodrigues' formula; log its inverse (e.g. Murray, Li & Sastry,
 * "A Mathematical Introduction to Robotic Manipulation", 1994, §2.2).
 * All matrices are 3×3 row-major arrays; angles in rad, except the degree helpers for the IK and program
 * files (rotationFromAngles, anglesFromRotation) and rotationVector (rad) at the end.
 */
import { DEG } from './parameters';

export type Mat3 = Float64Array;

/** R = Rz(rz)·Ry(ry)·Rx(rx). */
export function zyxMatrix(rx: number, ry: number, rz: number): Mat3 {
  const cx = Math.cos(rx), sx = Math.sin(rx), cy = Math.cos(ry), sy = Math.sin(ry), cz = Math.cos(rz), sz = Math.sin(rz);
  return Float64Array.of(
    cz * cy, cz * sy * sx - sz * cx, cz * sy * cx + sz * sx,
    sz * cy, sz * sy * sx + cz * cx, sz * sy * cx - cz * sx,
    -sy, cy * sx, cy * cx,
  );
}

const wrap = (a: number) => Math.atan2(Math.sin(a), Math.cos(a));
/** a + 2πk nearest to `near`. */
const nearest = (a: number, near: number) => near + wrap(a - near);

/**
 * Z-Y-X angles [rx, ry, rz] of R. A rotation has two angle triples, (rx, ry, rz) and
 * (rx + π, π − ry, rz + π); the one nearest `near` is returned, each angle shifted by whole turns to lie
 * nearest it, so the angles move continuously while the solver moves. At ry = ±90° only rz ∓ rx is
 * defined: rz keeps its `near` value.
 */
export function zyxAngles(R: ArrayLike<number>, near: ArrayLike<number> = [0, 0, 0]): [number, number, number] {
  const sy = Math.max(-1, Math.min(1, -R[6]));
  const cy = Math.hypot(R[0], R[3]);
  if (cy < 1e-12) {
    const rz = near[2];
    // sy = +1: R01 = sin(rx − rz), R02 = cos(rx − rz); sy = −1: R01 = −sin(rx + rz), R11 = cos(rx + rz).
    const ry = sy > 0 ? Math.PI / 2 : -Math.PI / 2;
    const rx = sy > 0 ? rz + Math.atan2(R[1], R[2]) : Math.atan2(-R[1], R[4]) - rz;
    return [nearest(rx, near[0]), nearest(ry, near[1]), nearest(rz, near[2])];
  }
  const ry = Math.atan2(sy, cy);
  const rx = Math.atan2(R[7], R[8]);
  const rz = Math.atan2(R[3], R[0]);
  const a: [number, number, number] = [nearest(rx, near[0]), nearest(ry, near[1]), nearest(rz, near[2])];
  const b: [number, number, number] = [nearest(rx + Math.PI, near[0]), nearest(Math.PI - ry, near[1]), nearest(rz + Math.PI, near[2])];
  const dist = (t: number[]) => Math.abs(t[0] - near[0]) + Math.abs(t[1] - near[1]) + Math.abs(t[2] - near[2]);
  return dist(a) <= dist(b) ? a : b;
}

/** Exp([ω]×) by Rodrigues' formula. */
export function expRotation(wx: number, wy: number, wz: number): Mat3 {
  const t = Math.hypot(wx, wy, wz);
  // sin t / t and (1 − cos t) / t², by their series below 1e-6 rad.
  const A = t < 1e-6 ? 1 - (t * t) / 6 : Math.sin(t) / t;
  const B = t < 1e-6 ? 0.5 - (t * t) / 24 : (1 - Math.cos(t)) / (t * t);
  return Float64Array.of(
    1 - B * (wy * wy + wz * wz), -A * wz + B * wx * wy, A * wy + B * wx * wz,
    A * wz + B * wx * wy, 1 - B * (wx * wx + wz * wz), -A * wx + B * wy * wz,
    -A * wy + B * wx * wz, A * wx + B * wy * wz, 1 - B * (wx * wx + wy * wy),
  );
}

export function multiply(a: ArrayLike<number>, b: ArrayLike<number>): Mat3 {
  const o = new Float64Array(9);
  for (let r = 0; r < 3; r++) for (let c = 0; c < 3; c++) o[3 * r + c] = a[3 * r] * b[c] + a[3 * r + 1] * b[3 + c] + a[3 * r + 2] * b[6 + c];
  return o;
}

export function transpose(a: ArrayLike<number>): Mat3 {
  return Float64Array.of(a[0], a[3], a[6], a[1], a[4], a[7], a[2], a[5], a[8]);
}

/** ω with Exp([ω]×) = R (|ω| ≤ π); the rotation angle is |ω|. */
export function logRotation(R: ArrayLike<number>): [number, number, number] {
  const c = Math.max(-1, Math.min(1, (R[0] + R[4] + R[8] - 1) / 2));
  const t = Math.acos(c);
  const vx = R[7] - R[5], vy = R[2] - R[6], vz = R[3] - R[1];
  if (t < 1e-6) return [vx / 2, vy / 2, vz / 2];
  if (Math.PI - t < 1e-6) {
    // Near a half turn: the axis from the diagonal of (R + I) / 2 = uuᵀ.
    const ux = Math.sqrt(Math.max((R[0] + 1) / 2, 0)), uy = Math.sqrt(Math.max((R[4] + 1) / 2, 0)), uz = Math.sqrt(Math.max((R[8] + 1) / 2, 0));
    const sy = R[1] + R[3] >= 0 ? 1 : -1, sz = R[2] + R[6] >= 0 ? 1 : -1;
    return [t * ux, t * sy * uy, t * sz * uz];
  }
  const k = t / (2 * Math.sin(t));
  return [k * vx, k * vy, k * vz];
}

/** The Z-Y-X angles of Exp([ω]×)·R(angles), nearest the current angles. */
export function incrementAngles(angles: ArrayLike<number>, wx: number, wy: number, wz: number): [number, number, number] {
  return zyxAngles(multiply(expRotation(wx, wy, wz), zyxMatrix(angles[0], angles[1], angles[2])), angles);
}

/**
 * The angles' rate matrix E (3×3 row-major): ω = E·[ṙx, ṙy, ṙz] for R = Rz·Ry·Rx, with ω in the
 * measurement frame. Columns: rx turns about Rz·Ry·e_x, ry about Rz·e_y, rz about e_z. det E = cos ry,
 * so E is singular on a wall mount; used only to express standard errors in the file's angles.
 */
export function zyxRateMatrix(ry: number, rz: number): Mat3 {
  const cy = Math.cos(ry), sy = Math.sin(ry), cz = Math.cos(rz), sz = Math.sin(rz);
  return Float64Array.of(
    cz * cy, -sz, 0,
    sz * cy, cz, 0,
    -sy, 0, 1,
  );
}

/** Inverse of a 3×3 matrix, or null when |det| < tol. */
export function invert3(m: ArrayLike<number>, tol = 1e-9): Mat3 | null {
  const [a, b, c, d, e, f, g, h, i] = Array.from(m);
  const A = e * i - f * h, B = -(d * i - f * g), C = d * h - e * g;
  const det = a * A + b * B + c * C;
  if (!(Math.abs(det) >= tol)) return null;
  return Float64Array.of(
    A / det, -(b * i - c * h) / det, (b * f - c * e) / det,
    B / det, (a * i - c * g) / det, -(a * f - c * d) / det,
    C / det, -(a * h - b * g) / det, (a * e - b * d) / det,
  );
}

/** Rotation matrix (row-major) of R = Rz(rz)·Ry(ry)·Rx(rx), angles in degrees. */
export function rotationFromAngles(rx: number, ry: number, rz: number, out = new Float64Array(9)): Float64Array {
  const cx = Math.cos(rx * DEG), sx = Math.sin(rx * DEG);
  const cy = Math.cos(ry * DEG), sy = Math.sin(ry * DEG);
  const cz = Math.cos(rz * DEG), sz = Math.sin(rz * DEG);
  out[0] = cz * cy; out[1] = cz * sy * sx - sz * cx; out[2] = cz * sy * cx + sz * sx;
  out[3] = sz * cy; out[4] = sz * sy * sx + cz * cx; out[5] = sz * sy * cx - cz * sx;
  out[6] = -sy;     out[7] = cy * sx;                out[8] = cy * cx;
  return out;
}

/** Angles (deg) of R = Rz(rz)·Ry(ry)·Rx(rx) for a row-major rotation; ry in [−90°, 90°]. */
export function anglesFromRotation(R: ArrayLike<number>): { rx: number; ry: number; rz: number } {
  const cy = Math.hypot(R[0], R[3]);
  if (cy > 1e-12) {
    return { rx: Math.atan2(R[7], R[8]) / DEG, ry: Math.atan2(-R[6], cy) / DEG, rz: Math.atan2(R[3], R[0]) / DEG };
  }
  // Gimbal lock (ry = ±90°): only rz − rx (or rz + rx) is defined; put it all in rx.
  return { rx: Math.atan2(-R[5], R[4]) / DEG, ry: Math.atan2(-R[6], cy) / DEG, rz: 0 };
}

/**
 * Rotation vector ω (rad) of a row-major rotation M (axis·angle, angle in [0, π]), into out[o..o+2].
 * Near π the axis comes from the diagonal (the skew part vanishes there).
 */
export function rotationVector(M: ArrayLike<number>, out: Float64Array, o = 0): void {
  const vx = M[7] - M[5], vy = M[2] - M[6], vz = M[3] - M[1];
  const s = 0.5 * Math.hypot(vx, vy, vz);
  const c = 0.5 * (M[0] + M[4] + M[8] - 1);
  const angle = Math.atan2(s, c);
  if (s > 1e-7 || c > 0) {
    // angle / sin(angle) → 1 as angle → 0.
    const f = s > 1e-12 ? angle / (2 * s) : 0.5;
    out[o] = f * vx; out[o + 1] = f * vy; out[o + 2] = f * vz;
    return;
  }
  // angle ≈ π: M ≈ 2uuᵀ − I.
  let ux = Math.sqrt(Math.max(0, (M[0] + 1) / 2));
  let uy = Math.sqrt(Math.max(0, (M[4] + 1) / 2));
  let uz = Math.sqrt(Math.max(0, (M[8] + 1) / 2));
  if (ux >= uy && ux >= uz) { uy = Math.sign(M[1] + M[3] || 1) * uy; uz = Math.sign(M[2] + M[6] || 1) * uz; }
  else if (uy >= uz) { ux = Math.sign(M[1] + M[3] || 1) * ux; uz = Math.sign(M[5] + M[7] || 1) * uz; }
  else { ux = Math.sign(M[2] + M[6] || 1) * ux; uy = Math.sign(M[5] + M[7] || 1) * uy; }
  const k = angle / (Math.hypot(ux, uy, uz) || 1);
  out[o] = k * ux; out[o + 1] = k * uy; out[o + 2] = k * uz;
}
