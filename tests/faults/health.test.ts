/**
 * GET /api/health against the run's real services: 200 when PostgreSQL, S3 and mail are up and every
 * migration is applied; 503 naming the one that is down while the harness has it stopped.
 */
import { afterEach, describe, expect, it } from 'vitest';
import journal from '../../drizzle/meta/_journal.json';
import { BASE_URL } from '../support/http';
import { harnessStatus, startMail, startPostgres, startS3, stopMail, stopPostgres, stopS3 } from '../support/services';
import { waitUntil } from '../support/wait';

interface Health {
  status: 'ok' | 'degraded';
  mode: string;
  database: boolean;
  s3: boolean;
  mail: boolean;
  migrations: { applied: number; expected: number; upToDate: boolean };
}

async function health(): Promise<{ status: number; body: Health; ms: number }> {
  const t0 = performance.now();
  const res = await fetch(`${BASE_URL}/api/health`, { signal: AbortSignal.timeout(15_000) });
  expect(res.headers.get('content-type')).toMatch(/application\/json/);
  return { status: res.status, body: (await res.json()) as Health, ms: performance.now() - t0 };
}

/** Poll until health answers 200 (services take a moment to be seen again). */
const healthyAgain = (timeoutMs = 20_000) => waitUntil('health answering 200 again', health, (h) => h.status === 200, { timeoutMs });

// Whatever a test stopped is started again, so the next fault file finds everything running.
afterEach(async () => {
  const s = await harnessStatus();
  if (!s.postgres) await startPostgres();
  if (!s.s3) await startS3();
  if (!s.mail) await startMail();
});

describe('GET /api/health', () => {
  it('is 200 with every service up and the migrations of this build applied', async () => {
    const res = await healthyAgain();
    expect(res.body).toMatchObject({ status: 'ok', database: true, s3: true, mail: true });
    expect(res.body.migrations).toEqual({ applied: journal.entries.length, expected: journal.entries.length, upToDate: true });
    expect(journal.entries.length).toBeGreaterThan(0);
  });

  it('is 503 naming S3 while the S3 fake is stopped', async () => {
    await stopS3();
    const res = await health();
    expect(res.status).toBe(503);
    expect(res.body).toMatchObject({ status: 'degraded', s3: false, database: true, mail: true });
    expect(res.ms).toBeLessThan(10_000);
    await startS3();
    expect((await healthyAgain()).body.s3).toBe(true);
  });

  it('is 503 naming mail while the mail fake is stopped', async () => {
    await stopMail();
    const res = await health();
    expect(res.status).toBe(503);
    expect(res.body).toMatchObject({ status: 'degraded', mail: false, database: true, s3: true });
    await startMail();
    expect((await healthyAgain()).body.mail).toBe(true);
  });

  it('is 503 naming the database while PostgreSQL is stopped', async () => {
    await stopPostgres('fast');
    const res = await health();
    expect(res.status).toBe(503);
    expect(res.body).toMatchObject({ status: 'degraded', database: false, s3: true, mail: true });
    expect(res.body.migrations.upToDate).toBe(false);
    expect(res.ms).toBeLessThan(10_000);
    await startPostgres();
    expect((await healthyAgain()).body.database).toBe(true);
  });
});
