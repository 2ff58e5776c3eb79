import type { APIRoute } from 'astro';
import { sql } from 'drizzle-orm';
import { connect } from 'node:net';
import { config } from '../../lib/server/config';
import { db } from '../../lib/server/db';
import { json } from '../../lib/server/http';
import { s3Reachable } from '../../lib/server/s3';

// Migrations this build knows of (drizzle/meta/_journal.json is bundled at build time).
import journal from '../../../drizzle/meta/_journal.json';

function tcpReachable(host: string, port: number, timeoutMs = 1500): Promise<boolean> {
  return new Promise((resolve) => {
    const socket = connect({ host, port });
    const done = (ok: boolean) => {
      socket.destroy();
      resolve(ok);
    };
    socket.setTimeout(timeoutMs, () => done(false));
    socket.once('connect', () => done(true));
    socket.once('error', () => done(false));
  });
}

/** Liveness and readiness: database, S3, mail and the migration level. 200 when all are up, else 503. */
export const GET: APIRoute = async () => {
  const c = config();
  const expected = journal.entries.length;
  const [database, storage, mail] = await Promise.all([
    (async () => {
      try {
        const rows = await db().execute<{ n: number }>(sql`select count(*)::int as n from drizzle.__drizzle_migrations`);
        return { ok: true, applied: Number(rows[0]?.n ?? 0) };
      } catch (e) {
        return { ok: false, applied: 0, error: String((e as Error).message) };
      }
    })(),
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
