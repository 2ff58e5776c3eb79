/**
 * Where each parameter lives in the flat parameter vector of an arm (internal units mm and rad), and
 * its key. n = number of joints, 5n + 12 entries:
 *   joint i (0-based): 5i + [a, alpha, d, theta, beta]
 *   base:              5n + [x, y, z, rx, ry, rz]
 *   tool:              5n + 6 + [x, y, z, rx, ry, rz]
 * Keys: "J<i+1>.a" … "J<i+1>.beta" (positional, so they stay stable when a joint is renamed; the joint's
 * name travels beside the key), "base.x" … "base.rz", "tool.x" … "tool.rz".
 *
 * Every module indexes the vector through these names; the full description of each entry (group,
 * unit, default identification) is parameterLayout in parameters.ts.
 */

export const JOINT_FIELDS = ['a', 'alpha', 'd', 'theta', 'beta'] as const;
export type JointField = (typeof JOINT_FIELDS)[number];
export const FRAME_FIELDS = ['x', 'y', 'z', 'rx', 'ry', 'rz'] as const;
export type FrameField = (typeof FRAME_FIELDS)[number];
export type FrameOwner = 'base' | 'tool';

/** Entries per joint. */
export const JOINT_STRIDE = JOINT_FIELDS.length;
/** Entries of the base or tool frame: position x, y, z, then Z-Y-X angles rx, ry, rz. */
export const FRAME_SIZE = FRAME_FIELDS.length;

/** Position of each field within its joint's block. */
export const JOINT_SLOT: Readonly<Record<JointField, number>> = { a: 0, alpha: 1, d: 2, theta: 3, beta: 4 };
/** Position of each field within the base or tool block; the rotations are the three after the position. */
export const FRAME_SLOT: Readonly<Record<FrameField, number>> = { x: 0, y: 1, z: 2, rx: 3, ry: 4, rz: 5 };

/** Length of the vector of an arm with n joints. */
export function parameterCount(n: number): number {
  return JOINT_STRIDE * n + 2 * FRAME_SIZE;
}

/** First entry of joint i (0-based), its `a`. */
export function jointOffset(i: number): number {
  return JOINT_STRIDE * i;
}

/** Index of a field of joint i (0-based). */
export function jointParam(i: number, field: JointField): number {
  return JOINT_STRIDE * i + JOINT_SLOT[field];
}

/** First entry of the base (base.x) of an arm with n joints. */
export function baseOffset(n: number): number {
  return JOINT_STRIDE * n;
}

/** First entry of the tool (tool.x) of an arm with n joints. */
export function toolOffset(n: number): number {
  return JOINT_STRIDE * n + FRAME_SIZE;
}

/** Index of a base field of an arm with n joints. */
export function baseParam(n: number, field: FrameField): number {
  return baseOffset(n) + FRAME_SLOT[field];
}

/** Index of a tool field of an arm with n joints. */
export function toolParam(n: number, field: FrameField): number {
  return toolOffset(n) + FRAME_SLOT[field];
}

/** Key of a joint field: "J<i+1>.<field>". */
export function jointKey(i: number, field: JointField): string {
  return `J${i + 1}.${field}`;
}

/** Key of a base or tool field: "base.rx", "tool.z". */
export function frameKey(owner: FrameOwner, field: FrameField): string {
  return `${owner}.${field}`;
}
