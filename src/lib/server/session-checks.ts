/**
 * Engine checks of a stored session: the nominal model against the measured points (registration,
 * residuals, the plausibility rules that need no fit) and how well the poses determine the parameters.
 */
import { asc, eq } from 'drizzle-orm';
import { armModelRevisions, sessionPoses as poseRows, sessions } from '../../db/schema';
import { sessionVerdicts, type Verdicts } from '../engine/plausibility';
import { poseSetQuality, type PoseSetQuality } from '../engine/planner';
import { EngineInputError, type ArmGeometry, type FrameSpec } from '../engine/types';
import { db as sharedDb, type Db } from './db';
import { runEngineTask } from './engine-runner';
import { unitJudgement } from './judgement';
import { allSessionPoses } from './sessions';

async function sessionGeometry(id: string, database: Db): Promise<ArmGeometry | undefined> {
  const [row] = await database
    .select({ geometry: armModelRevisions.geometry })
    .from(sessions)
    .innerJoin(armModelRevisions, eq(armModelRevisions.id, sessions.modelRevisionId))
    .where(eq(sessions.id, id));
  return row?.geometry;
}

export interface SessionCheck {
  /** Nominal-model error per pose (mm), after registering the tracker frame to the base when needed. */
  stats: { n: number; rms: number; mean: number; max: number; p95: number };
  registered: boolean;
  poses: { label: string; line: number; error: number }[];
  problem?: string;
  /** The plausibility rules that need no fit (src/lib/engine/plausibility.ts), the same the fit applies. */
  verdicts?: Verdicts;
}

/** The nominal model of the unit's revision against the measured points (engine checkGeometry). */
export async function sessionCheck(id: string, database: Db = sharedDb()): Promise<SessionCheck | undefined> {
  return (await sessionCheckDetail(id, database))?.check;
}

/**
 * The check with what the session page's 3-D view also needs: the nominal geometry, the base frame the check
 * used (registered when the geometry has none) and each pose's error vector (measured − predicted, mm).
 */
export async function sessionCheckDetail(id: string, database: Db = sharedDb()): Promise<
  | { check: SessionCheck; geometry: ArmGeometry; base: FrameSpec | undefined; residuals: { line: number; residual: [number, number, number] }[] }
  | undefined
> {
  const geometry = await sessionGeometry(id, database);
  if (!geometry) return undefined;
  const poses = await allSessionPoses(id, database);
  try {
    // Registration and residuals over every pose: on an engine thread, not the request thread.
    const report = await runEngineTask('checkGeometry', geometry, poses);
    const [unit] = await database.select({ unitId: sessions.unitId }).from(sessions).where(eq(sessions.id, id));
    const verdicts = sessionVerdicts(geometry, poses, unit ? await unitJudgement(unit.unitId, database) : undefined, report.stats.rms);
    return {
      check: { stats: report.stats, registered: report.registered, poses: report.poses.map((p) => ({ label: p.label, line: p.line, error: p.error })), verdicts },
      geometry,
      base: report.base,
      residuals: report.poses.map((p) => ({ line: p.line, residual: p.residual })),
    };
  } catch (e) {
    if (!(e instanceof EngineInputError)) throw e;
    return { check: { stats: { n: 0, rms: 0, mean: 0, max: 0, p95: 0 }, registered: false, poses: [], problem: e.message }, geometry, base: undefined, residuals: [] };
  }
}

export interface SessionQuality extends PoseSetQuality {
  poseCount: number;
  /** True when the engine warned: too few or poorly spread poses. */
  poor: boolean;
}

/** How well the measured configurations determine the parameters (engine poseSetQuality). */
export async function sessionQuality(id: string, database: Db = sharedDb()): Promise<SessionQuality | undefined> {
  const geometry = await sessionGeometry(id, database);
  if (!geometry) return undefined;
  const rows = await database.select({ q: poseRows.q }).from(poseRows).where(eq(poseRows.sessionId, id)).orderBy(asc(poseRows.idx));
  const q = rows.map((r) => r.q);
  const quality = poseSetQuality(geometry, q);
  return { ...quality, poseCount: q.length, poor: quality.warnings.length > 0 };
}
