/**
 * Numbers behind the arm sketch: joint positions of the chain from the engine's forward kinematics, the
 * slider range of each joint, and "nice" axis ticks. Kept apart from the island so it can be unit-tested.
 *
 * Browser-safe.
 */
import { forwardFrames } from '../../lib/engine/kinematics';
import type { ArmGeometry } from '../../lib/engine/types';

export interface ChainPoint {
  /** "base", a joint name, or "tool". */
  label: string;
  x: number;
  y: number;
  z: number;
}

/** Origins of base, joint frames 1…n and the tool frame in the measurement frame (mm); q in deg / mm. */
export function chainPoints(geometry: ArmGeometry, q: number[]): ChainPoint[] {
  const frames = forwardFrames(geometry, q);
  const labels = ['base', ...geometry.joints.map((j) => j.name), 'tool'];
  // Row-major 4×4: the translation is the last column (elements 3, 7, 11).
  return frames.map((f, i) => ({ label: labels[i] ?? `frame ${i}`, x: f[3]!, y: f[7]!, z: f[11]! }));
}

/** Slider range of a joint: its limits, else ±180 deg (revolute) or ±500 mm (prismatic). */
export function jointRange(j: ArmGeometry['joints'][number]): { min: number; max: number; step: number; unit: 'deg' | 'mm' } {
  const prismatic = j.type === 'prismatic';
  const min = j.min ?? (prismatic ? -500 : -180);
  const max = j.max ?? (prismatic ? 500 : 180);
  return { min, max, step: prismatic ? 1 : 0.5, unit: prismatic ? 'mm' : 'deg' };
}

/** The zero pose clamped into the limits (a joint whose range excludes 0 starts at its nearest limit). */
export function zeroPose(geometry: ArmGeometry): number[] {
  return geometry.joints.map((j) => {
    const r = jointRange(j);
    return Math.min(r.max, Math.max(r.min, 0));
  });
}

/** About `target` round tick values (1, 2, 5 × 10^k) covering [lo, hi]. */
export function niceTicks(lo: number, hi: number, target = 5): number[] {
  if (!(hi > lo)) return [lo];
  const raw = (hi - lo) / target;
  const mag = 10 ** Math.floor(Math.log10(raw));
  const step = [1, 2, 5, 10].map((m) => m * mag).find((s) => s >= raw) ?? 10 * mag;
  const out: number[] = [];
  // Multiples of the step, computed one by one (not accumulated) and trimmed of binary noise: 0.6, not 0.6000000000000001.
  for (let k = Math.ceil(lo / step - 1e-9); k * step <= hi + step * 1e-9; k++) out.push(Number((k * step).toPrecision(12)) || 0);
  return out;
}
