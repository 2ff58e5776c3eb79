import type { APIRoute } from 'astro';
import { config } from '../../lib/server/config';
import { appliedMigrations, tcpReachable } from '../../lib/server/health';
import { json } from '../../lib/server/http';
import { s3Reachable } from '../../lib/server/s3';

// Migrations this build knows of (drizzle/meta/_journal.json is bundled at build time).
import journal from '../../../drizzle/meta/_journal.json';

/** Liveness and readiness: database, S3, mail and the migration level. 200 when all are up, else 503. */
export const GET: APIRoute = async () => {
  const c = config();
  const expected = journal.entries.length;
  const [database, storage, mail] = await Promise.all([
    appliedMigrations(),
    s3Reachable(),
    tcpReachable(c.SMTP_HOST, c.SMTP_PORT),
  ]);
  const migrations = { applied: database.applied, expected, upToDate: database.applied === expected };
  const ok = database.ok && storage && mail && migrations.upToDate;
  return json(
    { status: ok ? 'ok' : 'degraded', mode: c.OFFSETRY_MODE, database: database.ok, s3: storage, mail, migrations },
    ok ? 200 : 503,
  );
};
