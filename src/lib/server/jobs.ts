/**
 * Fit jobs in PostgreSQL (pg-boss, queue "fit"): any number of app instances and worker processes share
 * them. A job only carries the fit id; the fits row is the record of truth.
 *
 * Exactly-once effect: a run claims the fit (queued|running → running, attempts + 1), computes, and writes
 * the result with a conditional update (`where id = … and state = 'running'`) in the same transaction as
 * its audit entry. A fit already fitted or failed is skipped, so a job delivered twice (a crashed worker's
 * expired job, a duplicate send) changes nothing the second time. A crashed worker's job expires after
 * expireInSeconds and is retried from scratch (retryLimit 3). Bad input (EngineInputError) fails the fit
 * at once with the problems in plain words: retrying would not change the answer.
 */
import { and, eq, inArray, lt, sql } from 'drizzle-orm';
import { hostname } from 'node:os';
import type PgBoss from 'pg-boss';
import { z } from 'zod';
import { armModelRevisions, fits, sessionPoses, sessions } from '../../db/schema';
import type { FitReport } from '../engine/fit';
import { serializeGeometry } from '../engine/geometry';
import { fitVerdicts } from '../engine/plausibility';
import { summarisePoses } from '../shared/fit-summary';
import { EngineInputError, formatProblem, type ArmGeometry, type SessionPose } from '../engine/types';
import { audit } from './audit';
import { db as sharedDb, type Db } from './db';
import { engineMode, runEngine } from './engine-runner';
import { insertFitPoses } from './fit-poses';
import { FIT_QUEUE, FIT_RETRY_LIMIT, jobQueue, stopJobQueue, timing } from './job-queue';
import { fitSettingsSchema, toFitOptions } from './fit-settings';
import { unitJudgement } from './judgement';
import { jsonSafe } from './json-safe';
import { log } from './log';
import { sha256 } from './tokens';
import { recordWebhookEvent } from './webhooks';

/** Which process ran a fit (fit.fitted audit details, job log lines): WORKER_NAME, else host and pid. */
export const WORKER_ID = process.env.WORKER_NAME || `${hostname()}:${process.pid}`;

interface FitJob {
  fitId: string;
}

const localWorkers: string[] = [];

/** Queue a fit (idempotent: a fit with a job waiting or running is not queued again). */
export async function enqueueFit(fitId: string): Promise<void> {
  const boss = await jobQueue();
  await boss.send(FIT_QUEUE, { fitId } satisfies FitJob, { singletonKey: fitId });
  // A worker in this process starts at once instead of at its next poll.
  for (const id of localWorkers) boss.notifyWorker(id);
}

/** The problems of bad input, in plain words, for the fit's error field. */
export function describeInputError(err: EngineInputError): string {
  const list = err.problems.slice(0, 20).map(formatProblem);
  const more = err.problems.length > 20 ? [`… and ${err.problems.length - 20} more`] : [];
  return `The session cannot be fitted with these settings: ${[...list, ...more].join('; ')}.`;
}

async function markFailed(database: Db, fitId: string, unitId: string, message: string, details: Record<string, unknown> = {}) {
  await database.transaction(async (tx) => {
    const rows = await tx
      .update(fits)
      .set({ state: 'failed', error: message, finishedAt: sql`now()` })
      .where(and(eq(fits.id, fitId), inArray(fits.state, ['queued', 'running'])))
      .returning({ id: fits.id });
    if (rows.length) await audit(tx, { actorId: null, unitId, entityType: 'fit', entityId: fitId, action: 'fit.failed', comment: message, details });
    if (rows.length) await recordWebhookEvent(tx, 'fit.finished', { fit: { id: fitId, state: 'failed', error: message }, unit: { id: unitId } });
  });
}

export type RunOutcome = 'fitted' | 'failed' | 'skipped';

/**
 * Run one fit from scratch. Returns 'skipped' when the fit is not waiting (already fitted or failed, or
 * unknown). Throws on trouble worth a retry (database away, thread crash).
 */
export async function runFit(fitId: string, database: Db = sharedDb()): Promise<RunOutcome> {
  const [claimed] = await database
    .update(fits)
    .set({ state: 'running', attempts: sql`${fits.attempts} + 1`, startedAt: sql`now()`, progress: null, error: null, finishedAt: null })
    .where(and(eq(fits.id, fitId), inArray(fits.state, ['queued', 'running'])))
    .returning({ id: fits.id, sessionId: fits.sessionId, unitId: fits.unitId, settings: fits.settings, attempts: fits.attempts });
  if (!claimed) return 'skipped';

  const [session] = await database
    .select({ fileSha256: sessions.fileSha256, geometry: armModelRevisions.geometry })
    .from(sessions)
    .innerJoin(armModelRevisions, eq(armModelRevisions.id, sessions.modelRevisionId))
    .where(eq(sessions.id, claimed.sessionId));
  if (!session) {
    await markFailed(database, fitId, claimed.unitId, 'The session of this fit no longer exists.');
    return 'failed';
  }
  const settings = fitSettingsSchema.safeParse(claimed.settings);
  if (!settings.success) {
    await markFailed(database, fitId, claimed.unitId, `The stored fit settings are invalid: ${settings.error.issues.map((i) => `${i.path.join('.')}: ${i.message}`).join('; ')}.`);
    return 'failed';
  }
  const loadStarted = performance.now();
  // Only the columns the engine takes (the q arrays are most of the bytes).
  const rows = await database
    .select({ label: sessionPoses.label, line: sessionPoses.line, q: sessionPoses.q, x: sessionPoses.x, y: sessionPoses.y, z: sessionPoses.z, split: sessionPoses.split })
    .from(sessionPoses)
    .where(eq(sessionPoses.sessionId, claimed.sessionId))
    .orderBy(sessionPoses.idx);
  const poses: SessionPose[] = rows.map((r) => ({ label: r.label, line: r.line, q: r.q, x: r.x, y: r.y, z: r.z, ...(r.split ? { split: r.split } : {}) }));
  const nominal = session.geometry as ArmGeometry;

  // Progress: the latest iteration, written at most every 200 ms, one write at a time.
  let latest: { iteration: number; rmsMm: number; cost: number; worker: string } | undefined;
  let lastWrite = 0;
  let writing: Promise<unknown> = Promise.resolve();
  let busy = false;
  const onIteration = (it: { iteration: number; rmsMm: number; cost: number }) => {
    latest = { iteration: it.iteration, rmsMm: it.rmsMm, cost: it.cost, worker: WORKER_ID };
    const now = Date.now();
    if (busy || now - lastWrite < 200) return;
    busy = true;
    lastWrite = now;
    const snapshot = latest;
    writing = database
      .update(fits)
      .set({ progress: jsonSafe(snapshot) })
      .where(and(eq(fits.id, fitId), eq(fits.state, 'running')))
      .catch(() => {})
      .finally(() => (busy = false));
  };

  const started = performance.now();
  const loadMs = Math.round(started - loadStarted);
  let report: FitReport;
  try {
    report = await runEngine({ nominal, poses, options: toFitOptions(settings.data), onIteration });
  } catch (err) {
    await writing;
    if (err instanceof EngineInputError) {
      await markFailed(database, fitId, claimed.unitId, describeInputError(err), { problems: err.problems.slice(0, 50) });
      return 'failed';
    }
    throw err;
  }
  const durationMs = Math.round(performance.now() - started);
  await writing;
  // The plausibility gate (one rule set with the session check and the command line), with the model's settings.
  const verdicts = jsonSafe(fitVerdicts(report, poses, await unitJudgement(claimed.unitId, database)));
  const storeStarted = performance.now();
  // The summary goes into fits.report, the per-pose part into fit_poses (one statement per 25 000 poses).
  const { poses: poseResults, ...withoutPoses } = report;
  const safe = jsonSafe({ ...withoutPoses, poseSummary: summarisePoses(poseResults) });
  const last = report.iterations.at(-1);
  const done = await database.transaction(async (tx) => {
    const updated = await tx
      .update(fits)
      .set({
        state: 'fitted',
        report: safe as unknown as Record<string, unknown>,
        calibrated: safe.calibrated,
        verdicts: verdicts as unknown as Record<string, unknown>,
        engineVersion: report.engineVersion,
        inputChecksums: { sessionFile: session.fileSha256, nominalGeometry: sha256(serializeGeometry(nominal)) },
        progress: { iteration: last?.iteration ?? 0, rmsMm: report.statistics.fit.after.rms, cost: last?.cost ?? 0, worker: WORKER_ID },
        durationMs,
        finishedAt: sql`now()`,
        error: null,
      })
      .where(and(eq(fits.id, fitId), eq(fits.state, 'running')))
      .returning({ id: fits.id });
    if (!updated.length) return false;
    await insertFitPoses(tx, fitId, poseResults);
    await audit(tx, {
      actorId: null,
      unitId: claimed.unitId,
      entityType: 'fit',
      entityId: fitId,
      action: 'fit.fitted',
      details: {
        rmsBeforeMm: report.statistics.fit.before.rms,
        rmsAfterMm: report.statistics.fit.after.rms,
        plausibility: verdicts.level,
        engineVersion: report.engineVersion,
        durationMs,
        attempt: claimed.attempts,
        worker: WORKER_ID,
      },
    });
    await recordWebhookEvent(tx, 'fit.finished', {
      fit: { id: fitId, state: 'fitted', sessionId: claimed.sessionId, rmsBeforeMm: report.statistics.fit.before.rms, rmsAfterMm: report.statistics.fit.after.rms },
      unit: { id: claimed.unitId },
    });
    return true;
  });
  // Where the time of a fit goes (load the poses, run the engine, store the results): for the scale benchmark.
  log('info', 'fit phases', { fitId, poses: poses.length, loadMs, engineMs: durationMs, engineCoreMs: Math.round(report.timing.totalMs), storeMs: Math.round(performance.now() - storeStarted) });
  return done ? 'fitted' : 'skipped';
}

async function handle(job: PgBoss.JobWithMetadata<FitJob>): Promise<{ outcome: RunOutcome }> {
  const fitId = job.data?.fitId;
  if (!fitId || !z.uuid().safeParse(fitId).success) return { outcome: 'skipped' };
  const database = sharedDb();
  try {
    const outcome = await runFit(fitId, database);
    log('info', 'fit job', { fitId, outcome, attempt: job.retryCount + 1, engine: engineMode(), worker: WORKER_ID });
    return { outcome };
  } catch (err) {
    const message = String((err as Error)?.message ?? err);
    log('warn', 'fit job failed', { fitId, attempt: job.retryCount + 1, error: message });
    if (job.retryCount >= job.retryLimit) {
      const [row] = await database.select({ unitId: fits.unitId }).from(fits).where(eq(fits.id, fitId));
      if (row) await markFailed(database, fitId, row.unitId, `The fit could not be run (${job.retryCount + 1} attempts): ${message}`);
      return { outcome: 'failed' };
    }
    throw err;
  }
}

/**
 * Queue again fits left waiting without a job (an enqueue lost between the insert and the queue, e.g. the
 * database went away), and fail fits whose runs kept dying far past every retry.
 */
export async function sweep(database: Db = sharedDb()): Promise<number> {
  const t = timing();
  const waiting = await database
    .select({ id: fits.id })
    .from(fits)
    .where(and(eq(fits.state, 'queued'), lt(fits.createdAt, sql`now() - interval '10 seconds'`)))
    .limit(200);
  for (const f of waiting) await enqueueFit(f.id);
  const stale = await database
    .select({ id: fits.id, unitId: fits.unitId })
    .from(fits)
    .where(and(eq(fits.state, 'running'), lt(fits.startedAt, sql`now() - make_interval(secs => ${t.FIT_JOB_EXPIRE_SECONDS * (FIT_RETRY_LIMIT + 2) + 60})`)))
    .limit(200);
  for (const f of stale) await markFailed(database, f.id, f.unitId, 'The fit was started several times and never finished (its worker stopped each time).');
  return waiting.length;
}

let sweepTimer: NodeJS.Timeout | undefined;
let starting: Promise<void> | undefined;
let stopped = false;

/**
 * Start fit workers in this process (idempotent). When PostgreSQL is away it keeps trying every 5 s;
 * the promise resolves once the workers run.
 */
export function startWorker(options: { concurrency?: number } = {}): Promise<void> {
  stopped = false;
  starting ??= (async () => {
    const concurrency = Math.max(1, Math.min(16, options.concurrency ?? 1));
    for (;;) {
      if (stopped) return;
      try {
        const boss = await jobQueue();
        const t = timing();
        for (let i = localWorkers.length; i < concurrency; i++) {
          localWorkers.push(
            await boss.work<FitJob>(FIT_QUEUE, { batchSize: 1, includeMetadata: true, pollingIntervalSeconds: t.FIT_JOB_POLL_SECONDS }, async ([job]) => (job ? handle(job) : undefined)),
          );
        }
        sweepTimer ??= setInterval(() => void sweep().catch(() => {}), 15_000);
        sweepTimer.unref();
        log('info', 'fit worker started', { concurrency, engine: engineMode() });
        return;
      } catch (err) {
        log('warn', 'fit worker could not start; retrying in 5 s', { error: String((err as Error)?.message ?? err) });
        await new Promise((r) => setTimeout(r, 5000).unref());
      }
    }
  })();
  return starting;
}

/** Stop this process's workers (waits for running fits up to timeoutMs) and the queue connection. */
export async function stopWorker(timeoutMs = 20_000): Promise<void> {
  stopped = true;
  if (sweepTimer) clearInterval(sweepTimer);
  sweepTimer = undefined;
  starting = undefined;
  localWorkers.length = 0;
  await stopJobQueue(timeoutMs);
}
