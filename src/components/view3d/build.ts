/**
 * Props of the 3-D view from what the pages already have (pure functions; no three.js, no server import).
 * Pages on the server call these and pass the decimated result to the island.
 */
import type { PoseResidual } from '../../lib/engine/fit';
import { forwardPoint } from '../../lib/engine/kinematics';
import type { ArmGeometry, FrameSpec } from '../../lib/engine/types';
import { decimatePoses, VIEW3D_LIMIT } from './decimate';
import type { View3DPose, View3DProps } from './types';

interface MeasuredPose {
  label: string;
  line: number;
  q: number[];
  x: number;
  y: number;
  z: number;
}

/**
 * A fitted fit: measured points, error vectors after calibration (measured − predicted), the pose roles
 * (an outlier is a fit pose flagged by the fit), the arm from the calibrated geometry (its base frame is
 * the registered one, so arm and points share the tracker frame).
 */
export function fitView(
  report: { poses: Pick<PoseResidual, 'label' | 'line' | 'role' | 'outlier' | 'after'>[]; calibrated: ArmGeometry },
  measured: MeasuredPose[],
  limit = VIEW3D_LIMIT,
  total?: number,
): View3DProps {
  const byLine = new Map(measured.map((m) => [m.line, m]));
  const poses: View3DPose[] = [];
  for (const r of report.poses) {
    const m = byLine.get(r.line);
    if (!m) continue;
    poses.push({ label: r.label, role: r.role === 'fit' && r.outlier ? 'outlier' : r.role, p: [m.x, m.y, m.z], e: r.after, q: m.q });
  }
  return { geometry: report.calibrated, poses: decimatePoses(poses, limit), total: total ?? poses.length, errorMeaning: 'measured − predicted with the calibrated geometry' };
}

/** A session before any fit: measured points and the nominal model's error, arm from the nominal geometry in the registered base. */
export function sessionView(
  geometry: ArmGeometry,
  base: FrameSpec | undefined,
  measured: MeasuredPose[],
  check: { line: number; residual: [number, number, number] }[],
  limit = VIEW3D_LIMIT,
): View3DProps {
  const byLine = new Map(check.map((c) => [c.line, c.residual]));
  const poses: View3DPose[] = measured.map((m) => ({ label: m.label, role: 'measured', p: [m.x, m.y, m.z], e: byLine.get(m.line) ?? null, q: m.q }));
  return { geometry: base ? { ...geometry, base } : geometry, poses: decimatePoses(poses, limit), total: poses.length, errorMeaning: 'measured − predicted with the nominal geometry' };
}

/** A pose plan: nothing is measured yet, so each pose's point is where the geometry puts the target. */
export function planView(geometry: ArmGeometry, plan: { label: string; q: number[] }[]): View3DProps {
  const poses: View3DPose[] = plan.map((p) => ({ label: p.label, role: 'planned', p: forwardPoint(geometry, p.q), q: p.q }));
  return { geometry, poses: decimatePoses(poses), total: poses.length, initialPose: poses[0]?.label };
}
