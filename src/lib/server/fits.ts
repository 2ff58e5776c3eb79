/**
 * Fits: one identification run over a session with its settings. Created here (row + audit in one
 * transaction, then queued as a job: src/lib/server/jobs.ts runs it), read while it runs (state, progress)
 * and afterwards (the engine's full report), listed, and re-run with poses excluded (a new fit; the old
 * one is kept).
 */
import { aliasedTable, and, count, desc, eq, inArray, isNull, sql, type SQL } from 'drizzle-orm';
import { z } from 'zod';
import { FIT_STATES, REVIEW_STATES, fits, parameterSets, sessionPoses, sessions, units, users } from '../../db/schema';
import type { FitReport } from '../engine/fit';
import { summariseReport } from '../shared/fit-summary';
import { audit } from './audit';
import { fitSettingsSchema, type FitSettings } from './fit-settings';
import { db as sharedDb, type Db } from './db';
import type { FieldProblem } from './http';
import { log } from './log';
import type { FitDetail, FitSummary } from '../shared/fit-view';

export { FIT_STATES } from '../../db/schema';

/**
 * Refit body: poses to exclude (added to the parent's), any setting to change, and a note saying why.
 * Without the defaults: a setting the body leaves out keeps the parent's value (a partial schema with
 * defaults would quietly reset it, e.g. drop the parent's cross-validation).
 */
const settingsShape = fitSettingsSchema.shape;
export const refitSchema = z.strictObject({
  ...(Object.fromEntries(Object.entries(settingsShape).map(([k, v]) => [k, v.unwrap().optional()])) as {
    [K in keyof typeof settingsShape]: z.ZodOptional<ReturnType<(typeof settingsShape)[K]['unwrap']>>;
  }),
  note: z.string({ error: 'note must be text' }).trim().max(4000, 'note is at most 4000 characters').optional(),
});
export type RefitInput = z.infer<typeof refitSchema>;

export type CreateResult = { ok: true; id: string; existing?: boolean } | { ok: false; status: 400 | 404 | 409; error: string; errors?: FieldProblem[] };

/** Exclusions must name poses of the session: a label, or "line:N" for one row. */
async function unknownExclusions(database: Db, sessionId: string, exclude: string[]): Promise<FieldProblem[]> {
  if (!exclude.length) return [];
  const rows = await database.select({ label: sessionPoses.label, line: sessionPoses.line }).from(sessionPoses).where(eq(sessionPoses.sessionId, sessionId));
  const labels = new Set(rows.map((r) => r.label));
  const lines = new Set(rows.map((r) => `line:${r.line}`));
  return exclude
    .map((e, i) => ({ e, i }))
    .filter(({ e }) => !labels.has(e) && !lines.has(e))
    .slice(0, 50)
    .map(({ e, i }) => ({ field: `exclude.${i}`, message: `the session has no pose "${e}"`, expected: 'a pose label of the session, or line:N for one row' }));
}

/**
 * Create a fit of a session and queue it. The row and its audit entry commit together; the job is queued
 * after the commit (a fit whose enqueue was lost is picked up by the worker's sweep).
 */
export async function createFit(
  sessionId: string,
  settings: FitSettings,
  actorId: string,
  options: { parentFitId?: string; exclusionNote?: string; database?: Db; enqueue?: (fitId: string) => Promise<void> } = {},
): Promise<CreateResult> {
  const database = options.database ?? sharedDb();
  const [session] = await database.select({ id: sessions.id, unitId: sessions.unitId, poseCount: sessions.poseCount }).from(sessions).where(eq(sessions.id, sessionId));
  if (!session) return { ok: false, status: 404, error: 'No such session.' };
  const bad = await unknownExclusions(database, sessionId, settings.exclude);
  if (bad.length) return { ok: false, status: 400, error: 'Some excluded poses are not in the session.', errors: bad };
  const created = await database.transaction(async (tx) => {
    // One fit per (session, settings) while it is queued or running: simultaneous identical requests queue
    // on this lock, and the later ones get the fit the first one made instead of a duplicate to approve.
    await tx.execute(sql`select pg_advisory_xact_lock(hashtext(${'fit:' + sessionId}))`);
    const [same] = await tx
      .select({ id: fits.id })
      .from(fits)
      .where(and(eq(fits.sessionId, sessionId), inArray(fits.state, ['queued', 'running']), sql`${fits.settings} = ${JSON.stringify(settings)}::jsonb`))
      .limit(1);
    if (same) return { id: same.id, existing: true };
    const [row] = await tx
      .insert(fits)
      .values({ sessionId, unitId: session.unitId, parentFitId: options.parentFitId ?? null, state: 'queued', settings, createdBy: actorId, exclusionNote: options.exclusionNote || null })
      .returning({ id: fits.id });
    await audit(tx, {
      actorId,
      unitId: session.unitId,
      entityType: 'fit',
      entityId: row!.id,
      action: 'fit.created',
      details: { sessionId, settings, ...(options.parentFitId ? { parentFitId: options.parentFitId } : {}), ...(options.exclusionNote ? { note: options.exclusionNote } : {}) },
    });
    return { id: row!.id, existing: false };
  });
  if (created.existing) return { ok: true, id: created.id, existing: true };
  const id = created.id;
  const enqueue = options.enqueue ?? (async (fitId: string) => (await import('./jobs')).enqueueFit(fitId));
  try {
    await enqueue(id);
  } catch (err) {
    // The row exists in state queued; the worker's sweep queues it again.
    log('warn', 'fit enqueue failed; the sweep will pick it up', { fitId: id, error: String((err as Error)?.message ?? err) });
  }
  return { ok: true, id };
}

/** A new fit from an earlier one: its settings, the overrides, and its exclusions plus the new ones. */
export async function refit(parentId: string, input: RefitInput, actorId: string, database: Db = sharedDb()): Promise<CreateResult> {
  const [parent] = await database.select().from(fits).where(eq(fits.id, parentId));
  if (!parent) return { ok: false, status: 404, error: 'No such fit.' };
  const base = fitSettingsSchema.safeParse(parent.settings);
  const { note, ...changes } = input;
  const given = Object.fromEntries(Object.entries(changes).filter(([, v]) => v !== undefined));
  const merged = { ...(base.success ? base.data : {}), ...given };
  merged.exclude = [...new Set([...(base.success ? base.data.exclude : []), ...(input.exclude ?? [])])];
  const parsed = fitSettingsSchema.safeParse(merged);
  if (!parsed.success) return { ok: false, status: 400, error: 'Invalid fit settings.', errors: parsed.error.issues.map((i) => ({ field: i.path.join('.') || undefined, message: i.message })) };
  return createFit(parent.sessionId, parsed.data, actorId, { parentFitId: parentId, exclusionNote: note, database });
}

const creator = aliasedTable(users, 'creator');
const submitter = aliasedTable(users, 'submitter');
const decider = aliasedTable(users, 'decider');
const overrider = aliasedTable(users, 'overrider');

const summaryColumns = {
  id: fits.id,
  sessionId: fits.sessionId,
  unitId: fits.unitId,
  unitSerial: units.serial,
  sessionMeasuredOn: sessions.measuredOn,
  sessionFileName: sessions.fileName,
  parentFitId: fits.parentFitId,
  state: fits.state,
  reviewState: fits.reviewState,
  settings: fits.settings,
  progress: fits.progress,
  error: fits.error,
  engineVersion: fits.engineVersion,
  attempts: fits.attempts,
  durationMs: fits.durationMs,
  createdAt: fits.createdAt,
  startedAt: fits.startedAt,
  finishedAt: fits.finishedAt,
  createdBy: fits.createdBy,
  createdByName: creator.name,
  submittedBy: fits.submittedBy,
  submittedByName: submitter.name,
  submittedAt: fits.submittedAt,
  decidedBy: fits.decidedBy,
  decidedByName: decider.name,
  decidedAt: fits.decidedAt,
  decisionComment: fits.decisionComment,
  plausibility: sql<string | null>`(${fits.verdicts} ->> 'level')`,
  // Read inside PostgreSQL so lists never load whole reports.
  rmsBeforeMm: sql<number | null>`(${fits.report} #>> '{statistics,fit,before,rms}')::float8`,
  rmsAfterMm: sql<number | null>`(${fits.report} #>> '{statistics,fit,after,rms}')::float8`,
};

const detailColumns = {
  ...summaryColumns,
  inputChecksums: fits.inputChecksums,
  report: fits.report,
  calibrated: fits.calibrated,
  verdicts: fits.verdicts,
  submitNote: fits.submitNote,
  overrideNote: fits.overrideNote,
  overrideByName: overrider.name,
  overrideAt: fits.overrideAt,
  exclusionNote: fits.exclusionNote,
};

function joinedSummary(database: Db) {
  return database
    .select(summaryColumns)
    .from(fits)
    .innerJoin(units, eq(units.id, fits.unitId))
    .innerJoin(sessions, eq(sessions.id, fits.sessionId))
    .leftJoin(creator, eq(creator.id, fits.createdBy))
    .leftJoin(submitter, eq(submitter.id, fits.submittedBy))
    .leftJoin(decider, eq(decider.id, fits.decidedBy));
}

function joinedDetail(database: Db) {
  return database
    .select(detailColumns)
    .from(fits)
    .innerJoin(units, eq(units.id, fits.unitId))
    .innerJoin(sessions, eq(sessions.id, fits.sessionId))
    .leftJoin(creator, eq(creator.id, fits.createdBy))
    .leftJoin(submitter, eq(submitter.id, fits.submittedBy))
    .leftJoin(decider, eq(decider.id, fits.decidedBy))
    .leftJoin(overrider, eq(overrider.id, fits.overrideBy));
}

/** One fit with everything: status and progress while it runs, then the full engine report. */
export async function getFit(id: string, database: Db = sharedDb()): Promise<FitDetail | undefined> {
  const [row] = await joinedDetail(database).where(eq(fits.id, id));
  if (!row) return undefined;
  const [set] = await database.select({ id: parameterSets.id, version: parameterSets.version, state: parameterSets.state }).from(parameterSets).where(eq(parameterSets.fitId, id));
  const detail = row as unknown as FitDetail;
  // Reports stored before the per-pose part moved to fit_poses are summarised here (same shape as new ones).
  const report = detail.report ? (summariseReport(detail.report as unknown as FitReport) as unknown as Record<string, unknown>) : null;
  return { ...detail, report, parameterSet: set ?? null };
}

export const fitListQuerySchema = z.strictObject({
  unit: z.string().trim().min(1).max(64).optional(),
  session: z.uuid({ error: 'session must be a session id' }).optional(),
  state: z.enum(FIT_STATES, { error: `state must be one of ${FIT_STATES.join(', ')}` }).optional(),
  review: z.enum([...REVIEW_STATES, 'none'] as const, { error: `review must be one of ${[...REVIEW_STATES, 'none'].join(', ')}` }).optional(),
  page: z.coerce.number({ error: 'page must be a whole number ≥ 1' }).int('page must be a whole number ≥ 1').min(1, 'page must be a whole number ≥ 1').max(100_000).default(1),
  pageSize: z.coerce.number({ error: 'pageSize must be a whole number from 1 to 200' }).int().min(1).max(200).default(25),
});
export type FitListQuery = z.infer<typeof fitListQuerySchema>;

/** Fits newest first, filtered by unit serial, session, state and review state; paginated. */
export async function listFits(query: Partial<FitListQuery>, database: Db = sharedDb()) {
  const q = fitListQuerySchema.parse(query);
  const where: SQL[] = [];
  if (q.unit) where.push(eq(units.serial, q.unit));
  if (q.session) where.push(eq(fits.sessionId, q.session));
  if (q.state) where.push(eq(fits.state, q.state));
  if (q.review === 'none') where.push(isNull(fits.reviewState));
  else if (q.review) where.push(eq(fits.reviewState, q.review));
  const cond = where.length ? and(...where) : undefined;
  const [{ total } = { total: 0 }] = await database
    .select({ total: count() })
    .from(fits)
    .innerJoin(units, eq(units.id, fits.unitId))
    .where(cond);
  const rows = await joinedSummary(database)
    .where(cond)
    .orderBy(desc(fits.createdAt), desc(fits.id))
    .limit(q.pageSize)
    .offset((q.page - 1) * q.pageSize);
  return { items: rows as unknown as FitSummary[], total, page: q.page, pageSize: q.pageSize };
}
