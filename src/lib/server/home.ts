/** The figures on the home page's task cards. */
import { count, eq, isNull } from 'drizzle-orm';
import { driftAlerts, fits, sessions, units } from '../../db/schema';
import { db as sharedDb, type Db } from './db';

export interface HomeCounts {
  units: number;
  sessions: number;
  awaitingReview: number;
  openAlerts: number;
}

export async function homeCounts(database: Db = sharedDb()): Promise<HomeCounts> {
  const [[u], [s], [r], [a]] = await Promise.all([
    database.select({ n: count() }).from(units),
    database.select({ n: count() }).from(sessions),
    database.select({ n: count() }).from(fits).where(eq(fits.reviewState, 'awaiting_review')),
    database.select({ n: count() }).from(driftAlerts).where(isNull(driftAlerts.acknowledgedAt)),
  ]);
  return { units: u?.n ?? 0, sessions: s?.n ?? 0, awaitingReview: r?.n ?? 0, openAlerts: a?.n ?? 0 };
}
