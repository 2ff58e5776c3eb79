/**
 * The whole-session work behind the session page, in one engine-thread call: the nominal check (registration
 * and per-pose error), the plausibility rules that need no fit, the pose-set quality, and a sample of at most
 * `limit` poses for the charts and the 3-D view (flagged largest nominal errors first, then an even sample:
 * the shared decimation). Takes and returns plain, structured-cloneable data.
 */
import { checkGeometry } from '../engine/fit';
import { sessionVerdicts, type JudgementSettings, type Verdicts } from '../engine/plausibility';
import { poseSetQuality, type PoseSetQuality } from '../engine/planner';
import { EngineInputError, type ArmGeometry, type FrameSpec, type SessionPose } from '../engine/types';
import { decimateIndices } from '../shared/decimate';

/** A pose of the chart sample: the measured pose (without its split) with its nominal-model error. */
export interface SessionDigestPose extends Omit<SessionPose, 'split'> {
  /** Position in the file's pose order (0-based). */
  k: number;
  /** Nominal-model error (mm) and its vector (measured − predicted), when the check ran. */
  error: number | null;
  residual: [number, number, number] | null;
}

export interface SessionDigest {
  poseCount: number;
  check: {
    stats: { n: number; rms: number; mean: number; max: number; p95: number };
    registered: boolean;
    problem?: string;
    verdicts?: Verdicts;
  };
  base: FrameSpec | undefined;
  quality: PoseSetQuality & { poseCount: number; poor: boolean };
  sample: SessionDigestPose[];
}

export function sessionDigest(geometry: ArmGeometry, poses: SessionPose[], settings: JudgementSettings, limit: number): SessionDigest {
  const quality = poseSetQuality(geometry, poses.map((p) => p.q));
  const qualityView = { ...quality, poseCount: poses.length, poor: quality.warnings.length > 0 };
  let check: SessionDigest['check'];
  let base: FrameSpec | undefined;
  let errors: { error: number; residual: [number, number, number] }[] | undefined;
  try {
    const report = checkGeometry(geometry, poses);
    check = { stats: report.stats, registered: report.registered, verdicts: sessionVerdicts(geometry, poses, settings, report.stats.rms) };
    base = report.base;
    errors = report.poses.map((p) => ({ error: p.error, residual: p.residual }));
  } catch (e) {
    if (!(e instanceof EngineInputError)) throw e;
    check = { stats: { n: 0, rms: 0, mean: 0, max: 0, p95: 0 }, registered: false, problem: e.message };
  }
  const chosen = decimateIndices(poses.length, limit, { score: (k) => errors?.[k]?.error ?? 0 });
  const sample = chosen.map((k): SessionDigestPose => {
    const p = poses[k]!;
    return { k, label: p.label, line: p.line, q: p.q, x: p.x, y: p.y, z: p.z, error: errors?.[k]?.error ?? null, residual: errors?.[k]?.residual ?? null };
  });
  return { poseCount: poses.length, check, base, quality: qualityView, sample };
}
