/** The checks behind GET /api/health: the database with its migration level, and a TCP port (the mail relay). */
import { sql } from 'drizzle-orm';
import { connect } from 'node:net';
import { db } from './db';

/** How many migrations the database has applied, or why it could not be asked. */
export async function appliedMigrations(): Promise<{ ok: boolean; applied: number; error?: string }> {
  try {
    const rows = await db().execute<{ n: number }>(sql`select count(*)::int as n from drizzle.__drizzle_migrations`);
    return { ok: true, applied: Number(rows[0]?.n ?? 0) };
  } catch (e) {
    return { ok: false, applied: 0, error: String((e as Error).message) };
  }
}

export function tcpReachable(host: string, port: number, timeoutMs = 1500): Promise<boolean> {
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
