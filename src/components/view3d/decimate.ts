import { decimate } from '../../lib/shared/decimate';
import type { View3DPose } from './types';

/** Default cap on the poses sent to the 3-D view: enough to see the cloud, small enough for a phone. */
export const VIEW3D_LIMIT = 3000;

const norm = (e: View3DPose['e']) => (e ? Math.hypot(e[0], e[1], e[2]) : 0);
const r3 = (v: number) => Math.round(v * 1000) / 1000;

/**
 * At most `limit` poses for the 3-D view, in their original order: every excluded pose and outlier, then the
 * largest errors (half the budget), then an even sample of the rest. Coordinates are rounded to 1 µm and
 * joint values to 4 decimals, the screens' precision (the tables and CSV files keep full precision); about
 * 145 bytes of JSON per pose, so 3000 poses stay near 440 kB.
 */
export function decimatePoses(poses: View3DPose[], limit = VIEW3D_LIMIT): View3DPose[] {
  const kept = decimate(poses, limit, { keep: (p) => p.role === 'excluded' || p.role === 'outlier', score: (p) => norm(p.e) });
  const out: View3DPose[] = [];
  kept.forEach((p) => {
    out.push({
      label: p.label,
      role: p.role,
      p: [r3(p.p[0]), r3(p.p[1]), r3(p.p[2])],
      ...(p.e ? { e: [r3(p.e[0]), r3(p.e[1]), r3(p.e[2])] as [number, number, number] } : {}),
      ...(p.q ? { q: p.q.map((v) => Math.round(v * 1e4) / 1e4) } : {}),
    });
  });
  return out;
}

/**
 * 1-2-5 magnification that draws the 90th-percentile error vector at about `fraction` of the scene's size
 * (the percentile, not the maximum, so one outlier does not shrink every other vector to nothing).
 */
export function autoMagnification(poses: View3DPose[], sceneSizeMm: number, fraction = 0.08): number {
  const sizes = poses.map((p) => norm(p.e)).filter((v) => v > 0).sort((a, b) => a - b);
  const top = sizes.length ? sizes[Math.min(sizes.length - 1, Math.floor(0.9 * sizes.length))]! : 0;
  if (!(top > 0) || !(sceneSizeMm > 0)) return 1;
  const raw = (fraction * sceneSizeMm) / top;
  const exp = Math.floor(Math.log10(raw));
  const base = 10 ** exp;
  const step = [1, 2, 5, 10].filter((s) => s * base <= raw).pop() ?? 1;
  return Math.max(1, step * base);
}

/** A round scale-bar length (1-2-5 steps, mm) near `target` mm. */
export function niceLength(target: number): number {
  if (!(target > 0)) return 1;
  const exp = Math.floor(Math.log10(target));
  const base = 10 ** exp;
  const step = [1, 2, 5, 10].filter((s) => s * base <= target).pop() ?? 1;
  return step * base;
}
