/**
 * Props of the 3-D view island (ArmView3D). Plain, serialisable data, shared by every page that mounts the
 * view (session, fit, pose plan, compensation): no three.js or server import here, so pages can build the
 * props without pulling the 3-D code in.
 *
 * Frames and units: every point and vector is in the measurement (tracker) frame, in mm; joint values at the
 * boundary are deg (revolute) and mm (prismatic), as in session files.
 */
import type { ArmGeometry } from '../../lib/engine/types';

/**
 * What a pose is in the view. Shape (and colour) per role, so colour is never the only carrier:
 * fit ● sphere · holdout ■ cube · excluded ✕ cross · outlier ▲ pyramid · measured ● sphere (no fit yet) ·
 * planned ◆ octahedron (not measured yet) · target ◆ octahedron (a point to reach, compensation).
 */
export type View3DRole = 'fit' | 'holdout' | 'excluded' | 'outlier' | 'measured' | 'planned' | 'target';

export interface View3DPose {
  /** The pose's label as in the file or plan (shown in the list and the highlight). */
  label: string;
  role: View3DRole;
  /** Point drawn for the pose (mm, measurement frame): the measured point, or the predicted one when nothing was measured. */
  p: [number, number, number];
  /** Error vector (mm, measurement frame) drawn from p, e.g. measured − predicted; absent when there is none. */
  e?: [number, number, number] | null;
  /** Joint values (deg / mm) at which the arm is drawn when the pose is chosen; absent ⇒ the arm is not drawn for it. */
  q?: number[] | null;
}

export interface View3DProps {
  /** The geometry the arm is drawn from (links and joint axes by the engine's forward kinematics); null ⇒ points only. */
  geometry: ArmGeometry | null;
  /** The poses to draw, already decimated (see decimatePoses); a few thousand at most. */
  poses: View3DPose[];
  /** How many poses the source has (the view says when it draws a sample). */
  total: number;
  /** What the error vectors are, in words, e.g. "measured − predicted with the calibrated geometry". */
  errorMeaning?: string;
  /** Label of the pose chosen first (default: the pose with the largest error, else the first). */
  initialPose?: string;
  /** Error magnification; default: a 1-2-5 step that makes the largest vector about a tenth of the scene. */
  magnification?: number;
  /** Heading of the view's card. */
  title?: string;
  /** The frame the points are in, in words (default: the tracker frame). */
  frameName?: string;
}

export const ROLE_TEXT: Record<View3DRole, { glyph: string; word: string; shape: string; colour: string }> = {
  fit: { glyph: '●', word: 'fit pose', shape: 'sphere', colour: '#0f6e6e' },
  holdout: { glyph: '■', word: 'held-out pose', shape: 'cube', colour: '#3d4757' },
  excluded: { glyph: '✕', word: 'excluded pose (not used)', shape: 'cross', colour: '#8a94a6' },
  outlier: { glyph: '▲', word: 'outlier (fit pose above the threshold)', shape: 'pyramid', colour: '#b7791f' },
  measured: { glyph: '●', word: 'measured pose', shape: 'sphere', colour: '#0f6e6e' },
  planned: { glyph: '◆', word: 'planned pose', shape: 'octahedron', colour: '#0f6e6e' },
  target: { glyph: '◆', word: 'target point', shape: 'octahedron', colour: '#0f6e6e' },
};

/** Drawing order of the roles in the legend and list filters. */
export const ROLE_ORDER: View3DRole[] = ['fit', 'measured', 'planned', 'target', 'holdout', 'outlier', 'excluded'];
