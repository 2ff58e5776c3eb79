/**
 * The demo's calibration history: for every demo unit, each measurement session except the newest is
 * fitted by the real engine, submitted by one metrology engineer and approved by the other through the
 * review code the app uses (four-eyes rule, versions, drift alerts, audit, mail). The newest session of
 * each unit stays unfitted, so a visitor can run a fit, review and approve it.
 *
 * Demo only: the approval times are moved back to a few days after each session was measured, so the
 * drift charts span the scenario's two years. That needs the parameter-set trigger switched off for the
 * moment of the update (the table owner may); production code never does this.
 */
import { and, asc, eq, gte, inArray, sql } from 'drizzle-orm';
import { auditLog, driftAlerts, fits, mailOutbox, parameterSets, sessions, units, users } from '../src/db/schema';
import type { Db } from '../src/lib/server/db';
import { fitSettingsSchema } from '../src/lib/server/fit-settings';
import { runFit } from '../src/lib/server/jobs';
import { approveFit, submitFit } from '../src/lib/server/reviews';
import type { CurrentUser } from '../src/lib/server/users';

async function demoUser(db: Db, email: string): Promise<CurrentUser> {
  const [u] = await db.select().from(users).where(eq(users.email, email));
  if (!u) throw new Error(`demo history: ${email} is missing (seed the users first)`);
  return { id: u.id, email: u.email, name: u.name, roles: u.roles, via: 'session' };
}

export async function seedHistory(db: Db, serials: string[]): Promise<string> {
  const started = performance.now();
  const startedAt = new Date(Date.now() - 1000);
  const runner = await demoUser(db, 'engineer@example.com');
  const reviewer = await demoUser(db, 'engineer2@example.com');
  const demoUnits = await db.select({ id: units.id, serial: units.serial }).from(units).where(inArray(units.serial, serials));
  let approved = 0;
  let skipped = 0;
  for (const unit of demoUnits) {
    const [done] = await db.select({ n: sql<number>`count(*)::int` }).from(fits).where(eq(fits.unitId, unit.id));
    if ((done?.n ?? 0) > 0) {
      skipped++;
      continue;
    }
    const visits = await db
      .select({ id: sessions.id, measuredOn: sessions.measuredOn })
      .from(sessions)
      .where(eq(sessions.unitId, unit.id))
      .orderBy(asc(sessions.measuredOn));
    for (const visit of visits.slice(0, -1)) {
      const settings = fitSettingsSchema.parse({ holdout: 0.2 });
      const [fit] = await db
        .insert(fits)
        .values({ sessionId: visit.id, unitId: unit.id, settings, createdBy: runner.id, state: 'queued' })
        .returning({ id: fits.id });
      const outcome = await runFit(fit!.id, db);
      if (outcome !== 'fitted') throw new Error(`demo history: the fit of ${unit.serial} (${visit.measuredOn}) ended ${outcome}`);
      const submitted = await submitFit(fit!.id, runner, 'Routine recalibration after the site visit.', db);
      if (!submitted.ok) throw new Error(`demo history: submit refused: ${submitted.error}`);
      const result = await approveFit(fit!.id, reviewer, 'Residuals at tracker noise; hold-out confirms.', db);
      if (!result.ok) throw new Error(`demo history: approval refused: ${result.error}`);
      approved++;
      // Backdate to the visit: fitted and submitted the day after, approved three days after.
      const day = (offset: string) => sql`${visit.measuredOn}::date + ${offset}::interval`;
      const fittedAt = day('1 day 10 hours');
      const submittedAt = day('1 day 10 hours 20 minutes');
      const approvedAt = day('3 days 14 hours');
      await db
        .update(fits)
        .set({ createdAt: fittedAt, startedAt: fittedAt, finishedAt: fittedAt, submittedAt, decidedAt: approvedAt })
        .where(eq(fits.id, fit!.id));
      await db.transaction(async (tx) => {
        await tx.execute(sql`alter table parameter_sets disable trigger parameter_sets_immutable`);
        await tx.update(parameterSets).set({ approvedAt, createdAt: approvedAt }).where(eq(parameterSets.fitId, fit!.id));
        await tx.execute(sql`alter table parameter_sets enable trigger parameter_sets_immutable`);
      });
      const recent = sql`${auditLog.at} > now() - interval '1 hour'`;
      await db.update(auditLog).set({ at: fittedAt }).where(and(eq(auditLog.unitId, unit.id), recent, inArray(auditLog.action, ['fit.created', 'fit.fitted'])));
      await db.update(auditLog).set({ at: submittedAt }).where(and(eq(auditLog.unitId, unit.id), recent, eq(auditLog.action, 'fit.submitted')));
      await db
        .update(auditLog)
        .set({ at: approvedAt })
        .where(and(eq(auditLog.unitId, unit.id), recent, inArray(auditLog.action, ['fit.approved', 'parameter_set.created', 'parameter_set.superseded', 'drift_alert.raised'])));
      await db.update(driftAlerts).set({ createdAt: approvedAt }).where(and(eq(driftAlerts.unitId, unit.id), sql`${driftAlerts.createdAt} > now() - interval '1 hour'`));
    }
    // Each visit's upload: the evening of the day it was measured.
    for (const visit of visits) {
      const uploadedAt = sql`${visit.measuredOn}::date + interval '18 hours'`;
      await db.update(sessions).set({ createdAt: uploadedAt }).where(eq(sessions.id, visit.id));
      await db.update(auditLog).set({ at: uploadedAt }).where(and(eq(auditLog.entityId, visit.id), eq(auditLog.action, 'session.uploaded')));
    }
  }
  // The review notifications of this back-dated history would arrive as news today; drop them (demo only).
  await db.delete(mailOutbox).where(and(eq(mailOutbox.status, 'pending'), gte(mailOutbox.createdAt, startedAt)));
  const ms = Math.round(performance.now() - started);
  return `demo history: ${approved} fits fitted, reviewed and approved; ${skipped} units already had fits (${ms} ms)`;
}
