/**
 * Review of a fitted fit (DESIGN.md): fitted → submit (awaiting review) → approve (a new parameter set
 * version; the previous one superseded) | reject ("returned", with the reviewer's reason). Every change
 * writes its audit entries and queues its e-mails in the transaction of the change.
 *
 * Four-eyes rule (config FOUR_EYES, default on), over the whole lineage: nobody who ran, refit (with or
 * without excluding poses) or submitted the fit or any fit it was re-run from may approve it. Administrators
 * are excepted; an approval made under that exception is recorded in the audit log.
 *
 * Approval order: a fit of a session measured before the session behind the unit's current set is refused
 * (409) unless the reviewer confirms it explicitly (confirmOlderSession), and the confirmation is audited.
 */
import { and, desc, eq, max, sql } from 'drizzle-orm';
import { z } from 'zod';
import { fits, parameterSets, sessions, units, users } from '../../db/schema';
import type { ArmGeometry } from '../engine/types';
import { audit } from './audit';
import { config } from './config';
import { db as sharedDb, type Db } from './db';
import { recordWebhookEvent } from './webhooks';
import { checkDriftOnApproval } from './drift';
import { composeMail, enqueueMail } from './mail';
import type { CurrentUser } from './users';

export const decisionSchema = z.strictObject({
  comment: z.string({ error: 'comment must be text' }).trim().max(4000, 'comment is at most 4000 characters').optional(),
  /** Approve although the unit's current set comes from a more recent session (recorded in the audit log). */
  confirmOlderSession: z.boolean({ error: 'confirmOlderSession must be true or false' }).optional(),
});
export const rejectSchema = z.strictObject({
  comment: z.string({ error: 'a reason is required (comment)' }).trim().min(1, 'say why the fit is returned (comment is required)').max(4000, 'comment is at most 4000 characters'),
});

/** Submit body: a note to the reviewer, and the written override an implausible fit needs (engineers only). */
export const submitSchema = decisionSchema.extend({
  override: z
    .string({ error: 'override must be text' })
    .trim()
    .min(20, 'say in at least 20 characters why this implausible fit should be reviewed anyway (override)')
    .max(4000, 'override is at most 4000 characters')
    .optional(),
});

export type ReviewResult<T extends object = object> = ({ ok: true } & T) | { ok: false; status: 403 | 404 | 409; error: string };

const isAdmin = (u: CurrentUser) => u.roles.includes('admin');
const link = (path: string) => `${config().PUBLIC_BASE_URL}${path}`;

/** Submit a fitted fit for review; mails every active engineer except the submitter. */
export async function submitFit(
  fitId: string,
  user: CurrentUser,
  comment: string | undefined,
  database: Db = sharedDb(),
  extra: { override?: string } = {},
): Promise<ReviewResult> {
  return database.transaction(async (tx) => {
    const [fit] = await tx
      .select({ id: fits.id, state: fits.state, reviewState: fits.reviewState, unitId: fits.unitId, serial: units.serial, plausibility: sql<string | null>`${fits.verdicts} ->> 'level'` })
      .from(fits)
      .innerJoin(units, eq(units.id, fits.unitId))
      .where(eq(fits.id, fitId))
      .for('update', { of: fits });
    if (!fit) return { ok: false, status: 404, error: 'No such fit.' };
    if (fit.state !== 'fitted') return { ok: false, status: 409, error: `Only a fitted fit can be submitted; this one is ${fit.state}.` };
    if (fit.reviewState === 'awaiting_review') return { ok: false, status: 409, error: 'This fit is already awaiting review.' };
    if (fit.reviewState === 'approved') return { ok: false, status: 409, error: 'This fit is already approved.' };
    if (fit.reviewState === 'returned') {
      return { ok: false, status: 409, error: 'This fit was returned by a reviewer and stays on record as it is; fit the session again and submit the new fit.' };
    }
    // The plausibility gate: an implausible fit goes to review only with an engineer's written override.
    const implausible = fit.plausibility === 'implausible';
    if (implausible && !extra.override) {
      return { ok: false, status: 409, error: 'This fit is implausible (see its verdicts); an engineer must write an override saying why it should be reviewed anyway.' };
    }
    if (implausible && !user.roles.some((r) => r === 'engineer' || r === 'admin')) {
      return { ok: false, status: 403, error: 'Only a metrology engineer (or an administrator) can override an implausible verdict.' };
    }
    const override = implausible ? extra.override! : null;
    await tx
      .update(fits)
      .set({
        reviewState: 'awaiting_review', submittedBy: user.id, submittedAt: sql`now()`, decisionComment: null, submitNote: comment || null,
        overrideNote: override, overrideBy: override ? user.id : null, overrideAt: override ? sql`now()` : null,
      })
      .where(eq(fits.id, fitId));
    await audit(tx, { actorId: user.id, unitId: fit.unitId, entityType: 'fit', entityId: fitId, action: 'fit.submitted', comment: comment || null, ...(override ? { details: { override } } : {}) });
    const reviewers = await tx
      .select({ email: users.email, name: users.name })
      .from(users)
      .where(and(eq(users.active, true), sql`'engineer' = any(${users.roles})`, sql`${users.id} <> ${user.id}`));
    await enqueueMail(
      tx,
      reviewers.map((r) =>
        composeMail(
          r.email,
          `Fit for unit ${fit.serial} awaits your review`,
          [
            `Hello ${r.name},`,
            `${user.name} submitted a fit of unit ${fit.serial} for review.`,
            ...(comment ? [`Their note: ${comment}`] : []),
            ...(override ? [`The fit is IMPLAUSIBLE by its verdicts; ${user.name} overrode that: ${override}`] : []),
          ],
          { label: 'Review the fit', url: link(`/reviews/${fitId}`) },
        ),
      ),
    );
    return { ok: true };
  });
}

/** One fit of a lineage: the fit itself (depth 0), the fit it was re-run from (1), and so on. */
export interface LineageStep {
  fitId: string;
  depth: number;
  createdBy: string | null;
  submittedBy: string | null;
  /** Poses this step excluded that its parent did not. */
  excludedHere: number;
}

/** The fit and every fit it was re-run from, nearest first (a cycle or a very long chain stops at 1000). */
export async function fitLineage(database: Db | Tx, fitId: string): Promise<LineageStep[]> {
  const rows = await database.execute<{ id: string; depth: number; created_by: string | null; submitted_by: string | null; excluded: number; parent_excluded: number | null }>(sql`
    with recursive chain as (
      select id, parent_fit_id, created_by, submitted_by, settings, 0 as depth from fits where id = ${fitId}
      union all
      select f.id, f.parent_fit_id, f.created_by, f.submitted_by, f.settings, c.depth + 1
      from fits f join chain c on f.id = c.parent_fit_id where c.depth < 1000
    )
    select c.id, c.depth, c.created_by, c.submitted_by,
      coalesce(jsonb_array_length(c.settings -> 'exclude'), 0) as excluded,
      (select coalesce(jsonb_array_length(p.settings -> 'exclude'), 0) from fits p where p.id = c.parent_fit_id) as parent_excluded
    from chain c order by c.depth`);
  return [...rows].map((r) => ({
    fitId: r.id,
    depth: Number(r.depth),
    createdBy: r.created_by,
    submittedBy: r.submitted_by,
    excludedHere: Math.max(0, Number(r.excluded) - Number(r.parent_excluded ?? 0)),
  }));
}

/** What `userId` did in a lineage, in words (empty when they took no part). */
export function lineageInvolvement(lineage: readonly LineageStep[], userId: string): string[] {
  const out: string[] = [];
  for (const step of lineage) {
    const which = step.depth === 0 ? 'this fit' : `fit ${step.fitId.slice(0, 8)} it was re-run from`;
    if (step.createdBy === userId) {
      if (step.depth === 0 && lineage.length === 1) out.push('ran this fit');
      else out.push(`${step.excludedHere ? `excluded ${step.excludedHere} pose${step.excludedHere === 1 ? '' : 's'} in` : step.depth === 0 ? 'refit' : 'ran'} ${which}`);
    }
    if (step.submittedBy === userId) out.push(`submitted ${which}`);
  }
  return out;
}

/**
 * Who may approve this fit; the refusal in plain words when the four-eyes rule applies. `lineage` is the
 * fit's chain from fitLineage(); without it only the fit itself is looked at.
 */
export function fourEyesRefusal(
  fit: { id?: string; createdBy: string | null; submittedBy: string | null },
  user: CurrentUser,
  fourEyes = config().FOUR_EYES,
  lineage?: readonly LineageStep[],
): string | null {
  if (!fourEyes || isAdmin(user)) return null;
  const steps = lineage ?? [{ fitId: fit.id ?? '', depth: 0, createdBy: fit.createdBy, submittedBy: fit.submittedBy, excludedHere: 0 }];
  const did = lineageInvolvement(steps, user.id);
  if (!did.length) return null;
  return `Four-eyes rule: you ${did.join(', ')}, so another engineer must approve it (administrators excepted).`;
}

/** The four-eyes refusal for a fit by id, over its whole lineage (for pages). */
export async function approvalRefusal(fitId: string, user: CurrentUser, database: Db = sharedDb()): Promise<string | null> {
  const lineage = await fitLineage(database, fitId);
  if (!lineage.length) return null;
  return fourEyesRefusal(lineage[0]!, user, config().FOUR_EYES, lineage);
}

/**
 * Approve: in one transaction lock the fit, re-check it still awaits review, lock the unit (so approvals
 * of a unit's fits queue behind each other), supersede the current set and insert version max + 1.
 * Two approvals of the same fit at once: the second waits for the lock, then finds it approved → 409.
 */
export async function approveFit(
  fitId: string,
  user: CurrentUser,
  comment: string | undefined,
  database: Db = sharedDb(),
  options: { confirmOlderSession?: boolean } = {},
): Promise<ReviewResult<{ parameterSet: { id: string; version: number } }>> {
  return database.transaction(async (tx) => {
    const [fit] = await tx.select().from(fits).where(eq(fits.id, fitId)).for('update');
    if (!fit) return { ok: false, status: 404, error: 'No such fit.' };
    if (fit.reviewState !== 'awaiting_review') {
      const now = fit.reviewState === 'approved' ? 'already approved' : fit.reviewState === 'returned' ? 'returned' : 'not submitted for review';
      return { ok: false, status: 409, error: `This fit is ${now}; only a fit awaiting review can be approved.` };
    }
    const lineage = await fitLineage(tx, fitId);
    const refusal = fourEyesRefusal(fit, user, config().FOUR_EYES, lineage);
    if (refusal) return { ok: false, status: 403, error: refusal };
    // The administrators' exception is used, not silent: it goes on record with what they did in the lineage.
    const exception = config().FOUR_EYES && isAdmin(user) ? lineageInvolvement(lineage, user.id) : [];
    if (!fit.calibrated) return { ok: false, status: 409, error: 'This fit has no calibrated geometry.' };
    const [unit] = await tx.select({ id: units.id, serial: units.serial }).from(units).where(eq(units.id, fit.unitId)).for('update');
    const [current] = await tx
      .select({ id: parameterSets.id, version: parameterSets.version, measuredOn: sessions.measuredOn, sessionId: sessions.id })
      .from(parameterSets)
      .leftJoin(fits, eq(fits.id, parameterSets.fitId))
      .leftJoin(sessions, eq(sessions.id, fits.sessionId))
      .where(and(eq(parameterSets.unitId, fit.unitId), eq(parameterSets.state, 'current')))
      .for('update', { of: parameterSets });
    const [mine] = await tx.select({ measuredOn: sessions.measuredOn }).from(sessions).where(eq(sessions.id, fit.sessionId));
    const olderThanCurrent = !!current?.measuredOn && !!mine && String(mine.measuredOn) < String(current.measuredOn);
    if (olderThanCurrent && !options.confirmOlderSession) {
      return {
        ok: false,
        status: 409,
        error:
          `This fit's session was measured on ${mine!.measuredOn}, before the session (${current!.measuredOn}) behind the unit's current parameter set v${current!.version}. ` +
          'Approving it would replace newer geometry with older. If that is intended (e.g. the newer set is known bad), approve again with confirmOlderSession: true; the confirmation is recorded.',
      };
    }
    if (current) await tx.update(parameterSets).set({ state: 'superseded' }).where(eq(parameterSets.id, current.id));
    const [{ top } = { top: 0 }] = await tx.select({ top: max(parameterSets.version) }).from(parameterSets).where(eq(parameterSets.unitId, fit.unitId));
    const version = (top ?? 0) + 1;
    const standardErrors = standardErrorsOf(fit.report);
    const [set] = await tx
      .insert(parameterSets)
      .values({
        unitId: fit.unitId,
        version,
        fitId,
        geometry: fit.calibrated as ArmGeometry,
        standardErrors,
        state: 'current',
        approvedBy: user.id,
        comment: comment ?? '',
      })
      .returning({ id: parameterSets.id, version: parameterSets.version });
    // Drift beyond tolerance from the previous version: alert, attention mark and mail, in this transaction.
    await checkDriftOnApproval(tx, { unitId: fit.unitId, newSetId: set!.id });
    await recordWebhookEvent(tx, 'parameter_set.approved', {
      parameterSet: { id: set!.id, version, previousId: current?.id ?? null },
      unit: { id: fit.unitId, serial: unit!.serial },
      fitId,
      approvedBy: { id: user.id, name: user.name },
    });
    await tx
      .update(fits)
      .set({ reviewState: 'approved', decidedBy: user.id, decidedAt: sql`now()`, decisionComment: comment || null })
      .where(eq(fits.id, fitId));
    await audit(tx, { actorId: user.id, unitId: fit.unitId, entityType: 'fit', entityId: fitId, action: 'fit.approved', comment: comment || null, details: { version } });
    if (exception.length) {
      await audit(tx, { actorId: user.id, unitId: fit.unitId, entityType: 'fit', entityId: fitId, action: 'four_eyes.waived', details: { involvement: exception, lineage: lineage.map((l) => l.fitId) } });
    }
    if (olderThanCurrent) {
      await audit(tx, {
        actorId: user.id,
        unitId: fit.unitId,
        entityType: 'fit',
        entityId: fitId,
        action: 'older_session.approved',
        comment: comment || null,
        details: { measuredOn: mine!.measuredOn, currentMeasuredOn: current!.measuredOn, currentVersion: current!.version, currentSessionId: current!.sessionId },
      });
    }
    if (current) {
      await audit(tx, { actorId: user.id, unitId: fit.unitId, entityType: 'parameter_set', entityId: current.id, action: 'parameter_set.superseded', details: { version: current.version, by: version } });
    }
    await audit(tx, { actorId: user.id, unitId: fit.unitId, entityType: 'parameter_set', entityId: set!.id, action: 'parameter_set.created', details: { version, fitId } });
    await mailPeople(tx, [fit.submittedBy, fit.createdBy], (p) =>
      composeMail(
        p.email,
        `Fit for unit ${unit!.serial} approved: parameter set v${version}`,
        [`Hello ${p.name},`, `${user.name} approved the fit of unit ${unit!.serial}. It is now the unit's parameter set v${version}.`, ...(comment ? [`Comment: ${comment}`] : [])],
        { label: 'Open the fit', url: link(`/fits/${fitId}`) },
      ),
    );
    return { ok: true, parameterSet: { id: set!.id, version } };
  });
}

/** Return a fit to its submitter with the reviewer's reason; the fit stays on record. */
export async function rejectFit(fitId: string, user: CurrentUser, comment: string, database: Db = sharedDb()): Promise<ReviewResult> {
  return database.transaction(async (tx) => {
    const [fit] = await tx.select().from(fits).where(eq(fits.id, fitId)).for('update');
    if (!fit) return { ok: false, status: 404, error: 'No such fit.' };
    if (fit.reviewState !== 'awaiting_review') {
      return { ok: false, status: 409, error: `This fit is ${fit.reviewState === 'approved' ? 'already approved' : fit.reviewState === 'returned' ? 'already returned' : 'not submitted for review'}; only a fit awaiting review can be returned.` };
    }
    const [unit] = await tx.select({ serial: units.serial }).from(units).where(eq(units.id, fit.unitId));
    await tx.update(fits).set({ reviewState: 'returned', decidedBy: user.id, decidedAt: sql`now()`, decisionComment: comment }).where(eq(fits.id, fitId));
    await audit(tx, { actorId: user.id, unitId: fit.unitId, entityType: 'fit', entityId: fitId, action: 'fit.returned', comment });
    await mailPeople(tx, [fit.submittedBy, fit.createdBy], (p) =>
      composeMail(
        p.email,
        `Fit for unit ${unit!.serial} returned`,
        [`Hello ${p.name},`, `${user.name} returned the fit of unit ${unit!.serial}.`, `Reason: ${comment}`],
        { label: 'Open the fit', url: link(`/fits/${fitId}`) },
      ),
    );
    return { ok: true };
  });
}

type Tx = Parameters<Parameters<Db['transaction']>[0]>[0];

async function mailPeople(tx: Tx, ids: (string | null)[], compose: (p: { email: string; name: string }) => ReturnType<typeof composeMail>) {
  const unique = [...new Set(ids.filter((i): i is string => !!i))];
  for (const id of unique) {
    const [p] = await tx.select({ email: users.email, name: users.name, active: users.active }).from(users).where(eq(users.id, id));
    if (p?.active) await enqueueMail(tx, compose(p));
  }
}

function standardErrorsOf(report: unknown): Record<string, number | null> {
  const params = (report as { parameters?: { key: string; standardError: number | null; status: string }[] } | null)?.parameters ?? [];
  return Object.fromEntries(params.map((p) => [p.key, p.status === 'identified' ? p.standardError : null]));
}

/** Fits awaiting review, oldest submission first. */
export async function listAwaitingReview(database: Db = sharedDb()) {
  return database
    .select({
      id: fits.id,
      unitSerial: units.serial,
      sessionId: fits.sessionId,
      measuredOn: sessions.measuredOn,
      submittedAt: fits.submittedAt,
      submittedBy: fits.submittedBy,
      submittedByName: users.name,
      createdBy: fits.createdBy,
      rmsBeforeMm: sql<number | null>`(${fits.report} #>> '{statistics,fit,before,rms}')::float8`,
      rmsAfterMm: sql<number | null>`(${fits.report} #>> '{statistics,fit,after,rms}')::float8`,
      holdoutAfterMm: sql<number | null>`(${fits.report} #>> '{statistics,holdout,after,rms}')::float8`,
    })
    .from(fits)
    .innerJoin(units, eq(units.id, fits.unitId))
    .innerJoin(sessions, eq(sessions.id, fits.sessionId))
    .leftJoin(users, eq(users.id, fits.submittedBy))
    .where(eq(fits.reviewState, 'awaiting_review'))
    .orderBy(fits.submittedAt);
}

/** A unit's parameter sets, newest first, each with its approver and geometry file. */
export async function listParameterSets(serial: string, database: Db = sharedDb()) {
  const [unit] = await database.select({ id: units.id, serial: units.serial }).from(units).where(eq(units.serial, serial));
  if (!unit) return undefined;
  const rows = await database
    .select({
      id: parameterSets.id,
      version: parameterSets.version,
      state: parameterSets.state,
      fitId: parameterSets.fitId,
      approvedBy: parameterSets.approvedBy,
      approvedByName: users.name,
      approvedByEmail: users.email,
      approvedAt: parameterSets.approvedAt,
      comment: parameterSets.comment,
      standardErrors: parameterSets.standardErrors,
      geometry: parameterSets.geometry,
    })
    .from(parameterSets)
    .leftJoin(users, eq(users.id, parameterSets.approvedBy))
    .where(eq(parameterSets.unitId, unit.id))
    .orderBy(desc(parameterSets.version));
  return { unit, parameterSets: rows };
}
