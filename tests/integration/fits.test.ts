/**
 * Fits through the API and the job queue: 202 at once, then the worker (pg-boss in PostgreSQL, in the
 * app instance) runs the engine; the fit page's data comes back complete and reproducible.
 */
import { eq } from 'drizzle-orm';
import PgBoss from 'pg-boss';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { auditLog, fits } from '../../src/db/schema';
import { readFileSync } from 'node:fs';
import { DEMO, signedIn, type Client } from '../support/http';
import { startWorker } from '../support/services';
import { poll } from '../support/wait';
import { createFixture, testDb, waitForFit, type Fixture } from './fit-fixtures';

let engineer: Client;
let fx: Fixture;

beforeAll(async () => {
  engineer = await signedIn(DEMO.engineer);
  fx = await createFixture({ count: 60, outlier: true });
});
afterAll(async () => {
  await testDb().$client.end();
});

describe('POST /api/sessions/{id}/fits', () => {
  it('answers 202 with the id at once, then the job fits the session', async () => {
    const res = await engineer.json(`/api/sessions/${fx.sessionId}/fits`, { method: 'POST', json: { holdout: 0.2, kFold: 3 } });
    expect(res.status).toBe(202);
    expect(res.body.id).toMatch(/^[0-9a-f-]{36}$/);
    const { fit, seen } = await waitForFit(engineer, res.body.id);
    expect(fit.state, fit.error ?? '').toBe('fitted');
    // The answer came before the work: the first poll saw it waiting or running (or it was very quick).
    expect([...seen].every((s) => ['queued', 'running', 'fitted'].includes(s))).toBe(true);
    expect(fit.attempts).toBe(1);

    const report = fit.report;
    for (const field of ['parameters', 'correlation', 'highCorrelations', 'observability', 'iterations', 'statistics', 'poseSummary', 'outliers', 'calibrated', 'timing']) {
      expect(report, field).toHaveProperty(field);
    }
    const { before, after } = report.statistics.fit;
    expect(after.rms).toBeLessThan(before.rms);
    // Hold-out poses were not used by the fit, and still improve.
    expect(report.statistics.holdout).not.toBeNull();
    expect(report.statistics.holdout.after.rms).toBeLessThan(report.statistics.holdout.before.rms);
    expect(report.statistics.crossValidation.k).toBe(3);
    expect(report).not.toHaveProperty('poses');
    expect(report.poseSummary.count).toBe(60);
    const posePage = await engineer.json(`/api/fits/${fit.id}/poses?pageSize=1000`);
    expect(posePage.body.poses).toHaveLength(60);
    // The bumped target (1.5 mm on x) stands out.
    expect(report.outliers).toContain('P007');

    // Reproducibility: settings, engine version, input checksums, timing.
    expect(fit.settings).toMatchObject({ holdout: 0.2, kFold: 3, robust: false, outlierThreshold: 3 });
    expect(fit.engineVersion).toBe(report.engineVersion);
    expect(fit.inputChecksums.sessionFile).toMatch(/^[0-9a-f]{64}$/);
    expect(fit.inputChecksums.nominalGeometry).toMatch(/^[0-9a-f]{64}$/);
    expect(fit.durationMs).toBeGreaterThanOrEqual(0);
    expect(new Date(fit.finishedAt).getTime()).toBeGreaterThanOrEqual(new Date(fit.startedAt).getTime());
    expect(fit.calibrated.format).toBe('offsetry-arm/1');
    expect(fit.progress.iteration).toBeGreaterThan(0);
    expect(fit.rmsAfterMm).toBeCloseTo(after.rms, 9);

    // Audit: created by the engineer, fitted by the worker.
    const entries = await testDb().select().from(auditLog).where(eq(auditLog.entityId, fit.id));
    expect(entries.map((e) => e.action).sort()).toEqual(['fit.created', 'fit.fitted']);
  });

  it('refuses bad settings with every problem named', async () => {
    const res = await engineer.json(`/api/sessions/${fx.sessionId}/fits`, {
      method: 'POST',
      json: { groups: ['lengths', 'wings'], holdout: 0.7, outlierThreshold: 1, kFold: 2, colour: 'teal' },
    });
    expect(res.status).toBe(400);
    const text = JSON.stringify(res.body.errors);
    for (const f of ['groups', 'holdout', 'outlierThreshold', 'kFold']) expect(text, f).toContain(f);
    expect(text).toContain('colour');
  });

  it('refuses exclusions that are not poses of the session', async () => {
    const res = await engineer.json(`/api/sessions/${fx.sessionId}/fits`, { method: 'POST', json: { exclude: ['P001', 'NOPE'] } });
    expect(res.status).toBe(400);
    expect(res.body.errors).toEqual([expect.objectContaining({ field: 'exclude.1', message: expect.stringContaining('NOPE') })]);
  });

  it('answers 404 for an unknown session and 403 for roles that may not run fits', async () => {
    expect((await engineer.json('/api/sessions/00000000-0000-4000-8000-000000000000/fits', { method: 'POST', json: {} })).status).toBe(404);
    const quality = await signedIn(DEMO.quality);
    expect((await quality.json(`/api/sessions/${fx.sessionId}/fits`, { method: 'POST', json: {} })).status).toBe(403);
  });

  it('fails a fit with too few poses in plain words, without retrying', async () => {
    const small = await createFixture({ count: 8, seed: 3 });
    const res = await engineer.json(`/api/sessions/${small.sessionId}/fits`, { method: 'POST', json: {} });
    expect(res.status).toBe(202);
    const { fit } = await waitForFit(engineer, res.body.id);
    expect(fit.state).toBe('failed');
    expect(fit.error).toMatch(/cannot be fitted/);
    expect(fit.error).toMatch(/fewer than|at least/);
    expect(fit.attempts).toBe(1);
  });
});

describe('refit with excluded poses', () => {
  it('makes a new fit without the outlier and keeps the old one', async () => {
    const first = await engineer.json(`/api/sessions/${fx.sessionId}/fits`, { method: 'POST', json: {} });
    const parent = (await waitForFit(engineer, first.body.id)).fit;
    expect(parent.report.outliers).toContain('P007');

    const res = await engineer.json(`/api/fits/${parent.id}/refit`, { method: 'POST', json: { exclude: ['P007'] } });
    expect(res.status).toBe(202);
    expect(res.body.id).not.toBe(parent.id);
    const child = (await waitForFit(engineer, res.body.id)).fit;
    expect(child.state).toBe('fitted');
    expect(child.parentFitId).toBe(parent.id);
    expect(child.settings.exclude).toEqual(['P007']);
    const childPoses = (await engineer.json(`/api/fits/${child.id}/poses?pageSize=1000`)).body.poses;
    const excluded = childPoses.find((p: { label: string }) => p.label === 'P007');
    expect(excluded.role).toBe('excluded');
    // Without the bumped pose the fit explains the rest better.
    expect(child.report.statistics.fit.after.rms).toBeLessThan(parent.report.statistics.fit.after.rms);

    const [old] = await testDb().select({ state: fits.state }).from(fits).where(eq(fits.id, parent.id));
    expect(old!.state).toBe('fitted');

    const list = await engineer.json(`/api/sessions/${fx.sessionId}/fits`);
    expect(list.status).toBe(200);
    const ids = list.body.items.map((f: { id: string }) => f.id);
    expect(ids).toContain(parent.id);
    expect(ids).toContain(child.id);
    const byUnit = await engineer.json(`/api/fits?unit=${encodeURIComponent(fx.serial)}&state=fitted`);
    expect(byUnit.body.total).toBeGreaterThanOrEqual(2);
    expect(byUnit.body.items.every((f: { unitSerial: string; state: string }) => f.unitSerial === fx.serial && f.state === 'fitted')).toBe(true);
  });

  it('rejects unknown list filters', async () => {
    const res = await engineer.json('/api/fits?state=baked&page=0');
    expect(res.status).toBe(400);
    expect(res.body.errors.map((e: { field: string }) => e.field).sort()).toEqual(['page', 'state']);
  });
});

describe('job queue', () => {
  it('runs a fit once even when its job is sent again', async () => {
    const res = await engineer.json(`/api/sessions/${fx.sessionId}/fits`, { method: 'POST', json: { groups: ['lengths', 'offsets', 'base', 'tool'] } });
    const fit = (await waitForFit(engineer, res.body.id)).fit;
    expect(fit.state).toBe('fitted');
    // Send a second job for the same fit, as a duplicate delivery would look to the worker.
    const db = testDb();
    const boss = new PgBoss({ connectionString: process.env.DATABASE_URL!, supervise: false, schedule: false, migrate: false, max: 1 });
    await boss.start();
    const jobId = await boss.send('fit', { fitId: fit.id }, { singletonKey: fit.id });
    expect(jobId).toBeTruthy();
    const { value: job } = await poll(() => boss.getJobById('fit', jobId!), (j) => j?.state === 'completed', { timeoutMs: 30_000, intervalMs: 200 });
    await boss.stop({ graceful: false, wait: true, close: true });
    expect(job?.state).toBe('completed');
    expect(job?.output).toEqual({ outcome: 'skipped' });
    const again = (await engineer.json(`/api/fits/${fit.id}`)).body.fit;
    expect(again.attempts).toBe(1);
    expect(again.finishedAt).toBe(fit.finishedAt);
    const entries = await db.select().from(auditLog).where(eq(auditLog.entityId, fit.id));
    expect(entries.filter((e) => e.action === 'fit.fitted')).toHaveLength(1);
  });
});

describe('a crashed run', () => {
  it('is run again from scratch when its job is retried', async () => {
    // A fit a worker had claimed (running, attempt 1) when it died; the retried job arrives.
    const db = testDb();
    const [row] = await db
      .insert(fits)
      .values({ sessionId: fx.sessionId, unitId: fx.unitId, state: 'running', attempts: 1, startedAt: new Date(Date.now() - 60_000), settings: { groups: ['lengths', 'base', 'tool'] }, progress: { iteration: 2, rmsMm: 0.5, cost: 1 } })
      .returning();
    const boss = new PgBoss({ connectionString: process.env.DATABASE_URL!, supervise: false, schedule: false, migrate: false, max: 1 });
    await boss.start();
    await boss.send('fit', { fitId: row!.id }, { singletonKey: row!.id });
    await boss.stop({ graceful: false, wait: true, close: true });
    const { fit } = await waitForFit(engineer, row!.id);
    expect(fit.state).toBe('fitted');
    expect(fit.attempts).toBe(2);
    expect(new Date(fit.startedAt).getTime()).toBeGreaterThan(row!.startedAt!.getTime());
    expect(fit.progress.iteration).toBe(fit.report.iterations.at(-1).iteration);
    const entries = await db.select().from(auditLog).where(eq(auditLog.entityId, row!.id));
    expect(entries.map((e) => e.action)).toEqual(['fit.fitted']);
    expect(entries[0]!.details).toMatchObject({ attempt: 2 });
  });
});

describe('worker process (npm run worker)', () => {
  it('starts on the shared queue, runs fits on threads, and stops cleanly on SIGTERM', async () => {
    const worker = await startWorker({ concurrency: 2 });
    const log = readFileSync(worker.logFile, 'utf8');
    expect(log).toContain('"msg":"fit worker ready"');
    expect(log).toContain('"engine":"thread"');
    // Fits still finish with two workers on the queue (the app's and this one), each exactly once.
    const ids = await Promise.all(
      [1, 2, 3, 4].map(async () => (await engineer.json(`/api/sessions/${fx.sessionId}/fits`, { method: 'POST', json: { groups: ['lengths', 'base', 'tool'] } })).body.id as string),
    );
    for (const id of ids) {
      const { fit } = await waitForFit(engineer, id);
      expect(fit.state).toBe('fitted');
      expect(fit.attempts).toBe(1);
    }
    const stopped = await worker.stop('SIGTERM');
    expect(stopped).toMatchObject({ stopped: true, code: 0 });
  });
});

