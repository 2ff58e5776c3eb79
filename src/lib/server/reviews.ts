/**
 * Review of a fitted fit (DESIGN.md): fitted → submit (awaiting review) → approve (a new parameter set
 * version; the previous one superseded) | reject ("returned", with the reviewer's reason). Every change
 * writes its audit entries and queues its e-mails in the transaction of the change.
 *
 * Four-eyes rule (config FOUR_EYES, default on): the person who ran the fit and the person who submitted
 * it cannot approve it, unless they are an administrator.
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

/** Who may approve this fit; the refusal in plain words when the four-eyes rule applies. */
export function fourEyesRefusal(fit: { createdBy: string | null; submittedBy: string | null }, user: CurrentUser, fourEyes = config().FOUR_EYES): string | null {
  if (!fourEyes || isAdmin(user)) return null;
  if (fit.createdBy === user.id) return 'Four-eyes rule: you ran this fit, so another engineer must approve it (administrators excepted).';
  if (fit.submittedBy === user.id) return 'Four-eyes rule: you submitted this fit, so another engineer must approve it (administrators excepted).';
  return null;
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
): Promise<ReviewResult<{ parameterSet: { id: string; version: number } }>> {
  return database.transaction(async (tx) => {
    const [fit] = await tx.select().from(fits).where(eq(fits.id, fitId)).for('update');
    if (!fit) return { ok: false, status: 404, error: 'No such fit.' };
    if (fit.reviewState !== 'awaiting_review') {
      const now = fit.reviewState === 'approved' ? 'already approved' : fit.reviewState === 'returned' ? 'returned' : 'not submitted for review';
      return { ok: false, status: 409, error: `This fit is ${now}; only a fit awaiting review can be approved.` };
    }
    const refusal = fourEyesRefusal(fit, user);
    if (refusal) return { ok: false, status: 403, error: refusal };
    if (!fit.calibrated) return { ok: false, status: 409, error: 'This fit has no calibrated geometry.' };
    const [unit] = await tx.select({ id: units.id, serial: units.serial }).from(units).where(eq(units.id, fit.unitId)).for('update');
    const [current] = await tx
      .select({ id: parameterSets.id, version: parameterSets.version })
      .from(parameterSets)
      .where(and(eq(parameterSets.unitId, fit.unitId), eq(parameterSets.state, 'current')))
      .for('update');
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
