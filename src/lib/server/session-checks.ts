/**
 * Engine checks of a stored session: the nominal model against the measured points (registration,
 * residuals, the plausibility rules that need no fit) and how well the poses determine the parameters (kept
 * with the session page's digest).
 */
import { createHash } from 'node:crypto';
import { and, eq } from 'drizzle-orm';
import { armModelRevisions, sessionDigests, sessions } from '../../db/schema';
import { ENGINE_VERSION } from '../engine/fit';
import { sessionVerdicts, type Verdicts } from '../engine/plausibility';
import { EngineInputError, type ArmGeometry } from '../engine/types';
import { db as sharedDb, type Db } from './db';
import { runEngineTask } from './engine-runner';
import { unitJudgement } from './judgement';
import { jsonSafe } from './json-safe';
import { log } from './log';
import type { SessionDigest } from './session-digest-task';
import { allSessionPoses, type CheckOrder, type SessionCheckQuery } from './sessions';

/** What a session's checks take besides its poses: the unit (for its judgement settings) and the revision's geometry. */
async function sessionInputs(id: string, database: Db): Promise<{ unitId: string; geometry: ArmGeometry } | undefined> {
  const [row] = await database
    .select({ unitId: sessions.unitId, geometry: armModelRevisions.geometry })
    .from(sessions)
    .innerJoin(armModelRevisions, eq(armModelRevisions.id, sessions.modelRevisionId))
    .where(eq(sessions.id, id));
  return row;
}

export interface SessionCheck {
  /** Nominal-model error per pose (mm), after registering the tracker frame to the base when needed. */
  stats: { n: number; rms: number; mean: number; max: number; p95: number };
  registered: boolean;
  /** One page of the poses' errors, in the order `posePage.order` asks for. */
  poses: { label: string; line: number; error: number }[];
  posePage: { page: number; pageSize: number; total: number; order: CheckOrder };
  problem?: string;
  /** The plausibility rules that need no fit (src/lib/engine/plausibility.ts), the same the fit applies. */
  verdicts?: Verdicts;
}

/**
 * The nominal model of the unit's revision against the measured points (engine checkGeometry): the statistics
 * and verdicts over every pose, and one page of the poses' errors (the answer stays small at any session
 * size). For the API; the session page reads the kept digest instead (sessionPageDigest below).
 */
export async function sessionCheck(id: string, query: SessionCheckQuery = { page: 1, pageSize: 500, order: 'file' }, database: Db = sharedDb()): Promise<SessionCheck | undefined> {
  const inputs = await sessionInputs(id, database);
  if (!inputs) return undefined;
  const { geometry } = inputs;
  const poses = await allSessionPoses(id, database);
  try {
    // Registration and residuals over every pose: on an engine thread, not the request thread.
    const report = await runEngineTask('checkGeometry', geometry, poses);
    const verdicts = sessionVerdicts(geometry, poses, await unitJudgement(inputs.unitId, database), report.stats.rms);
    // Largest first with the file line breaking ties, so pages never overlap.
    const ordered = query.order === 'largest' ? [...report.poses].sort((a, b) => b.error - a.error || a.line - b.line) : report.poses;
    const start = (query.page - 1) * query.pageSize;
    return {
      stats: report.stats,
      registered: report.registered,
      poses: ordered.slice(start, start + query.pageSize).map((p) => ({ label: p.label, line: p.line, error: p.error })),
      posePage: { page: query.page, pageSize: query.pageSize, total: report.poses.length, order: query.order },
      verdicts,
    };
  } catch (e) {
    if (!(e instanceof EngineInputError)) throw e;
    return { stats: { n: 0, rms: 0, mean: 0, max: 0, p95: 0 }, registered: false, poses: [], posePage: { page: query.page, pageSize: query.pageSize, total: 0, order: query.order }, problem: e.message };
  }
}

/** Poses the session page's charts and 3-D view draw at most. */
export const SESSION_SAMPLE_LIMIT = 1500;

/**
 * The session page's checks, computed once on an engine thread and kept in session_digests (the poses and the
 * revision of a session never change; the key covers the judgement settings, the engine version and the sample
 * size, so a change of any of them recomputes on the next read). Undefined when the session does not exist.
 */
export async function sessionPageDigest(id: string, database: Db = sharedDb()): Promise<(SessionDigest & { geometry: ArmGeometry }) | undefined> {
  // One computation per session at a time in this process (the upload's warm-up and a first view meet here).
  const running = inFlight.get(id);
  if (running && database === sharedDb()) return running;
  const work = readOrCompute(id, database);
  if (database === sharedDb()) {
    inFlight.set(id, work);
    void work.finally(() => inFlight.delete(id)).catch(() => {});
  }
  return work;
}

const inFlight = new Map<string, Promise<(SessionDigest & { geometry: ArmGeometry }) | undefined>>();

async function readOrCompute(id: string, database: Db): Promise<(SessionDigest & { geometry: ArmGeometry }) | undefined> {
  const row = await sessionInputs(id, database);
  if (!row) return undefined;
  const settings = await unitJudgement(row.unitId, database);
  const key = createHash('sha256').update(JSON.stringify({ settings, engine: ENGINE_VERSION, limit: SESSION_SAMPLE_LIMIT })).digest('hex');
  const [kept] = await database
    .select({ body: sessionDigests.body })
    .from(sessionDigests)
    .where(and(eq(sessionDigests.sessionId, id), eq(sessionDigests.key, key)));
  if (kept) return { ...(kept.body as SessionDigest), geometry: row.geometry };
  const poses = await allSessionPoses(id, database);
  const digest = jsonSafe(await runEngineTask('sessionDigest', row.geometry, poses, settings, SESSION_SAMPLE_LIMIT));
  await database
    .insert(sessionDigests)
    .values({ sessionId: id, key, body: digest })
    .onConflictDoUpdate({ target: sessionDigests.sessionId, set: { key, body: digest, computedAt: new Date() } })
    // A session deleted meanwhile: nothing to keep.
    .catch((err) => log('warn', 'session digest not stored', { sessionId: id, error: String(err?.message ?? err) }));
  return { ...digest, geometry: row.geometry };
}

/** Compute and keep a new session's digest in the background, so its first view is quick. */
export function warmSessionDigest(id: string): void {
  if (process.env.VITEST) return;
  void sessionPageDigest(id).catch((err) => log('warn', 'session digest not computed', { sessionId: id, error: String(err?.message ?? err) }));
}
