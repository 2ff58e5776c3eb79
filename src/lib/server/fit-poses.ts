/**
 * The per-pose part of fit reports: streamed with COPY when a fit is stored,
 * read page by page (file order or largest residual first) and as a CSV stream. Reports stored before the
 * split keep their poses inside fits.report; they are read from there.
 */
import { and, asc, count, desc, eq, sql } from 'drizzle-orm';
import { z } from 'zod';
import { fitPoses, fits, sessionPoses } from '../../db/schema';
import type { PoseResidual } from '../engine/fit';
import type { FitPoseRow } from '../shared/fit-view';
import { arrayParam, copyField, copyInto, pgArray } from './bulk';
import { db as sharedDb, type Db } from './db';

type Tx = Parameters<Parameters<Db['transaction']>[0]>[0];

/**
 * Store a fit's poses (in the transaction that stores its summary), streamed with COPY … FROM STDIN: one
 * statement for any number of poses.
 */
export async function insertFitPoses(tx: Tx | Db, fitId: string, poses: readonly PoseResidual[]): Promise<void> {
  const { text, num, bool } = copyField;
  await copyInto(tx, 'fit_poses', FIT_POSE_COLUMNS, poses.length, (j) => {
    const p = poses[j]!;
    return [fitId, j, text(p.label), p.line, p.role, num(p.before[0]), num(p.before[1]), num(p.before[2]), num(p.after[0]), num(p.after[1]), num(p.after[2]), num(p.errorBefore), num(p.errorAfter), num(p.standardised), bool(p.outlier)].join('\t');
  });
}
const FIT_POSE_COLUMNS = ['fit_id', 'idx', 'label', 'line', 'role', 'before_x', 'before_y', 'before_z', 'after_x', 'after_y', 'after_z', 'error_before', 'error_after', 'standardised', 'outlier'];

export const fitPosePageSchema = z.strictObject({
  page: z.coerce.number({ error: 'page must be a whole number' }).int('page must be a whole number').min(1, 'page starts at 1').max(1_000_000).default(1),
  pageSize: z.coerce.number({ error: 'pageSize must be a whole number' }).int('pageSize must be a whole number').min(1, 'pageSize is at least 1').max(1000, 'pageSize is at most 1000').default(100),
  order: z.enum(['file', 'largest'], { error: 'order must be file (file order) or largest (largest residual after calibration first)' }).default('file'),
});
export type FitPosePage = z.infer<typeof fitPosePageSchema>;


const columns = {
  idx: fitPoses.idx,
  label: fitPoses.label,
  line: fitPoses.line,
  role: fitPoses.role,
  bx: fitPoses.beforeX,
  by: fitPoses.beforeY,
  bz: fitPoses.beforeZ,
  ax: fitPoses.afterX,
  ay: fitPoses.afterY,
  az: fitPoses.afterZ,
  errorBefore: fitPoses.errorBefore,
  errorAfter: fitPoses.errorAfter,
  standardised: fitPoses.standardised,
  outlier: fitPoses.outlier,
};
interface Row {
  idx: number; label: string; line: number; role: PoseResidual['role'];
  bx: number; by: number; bz: number; ax: number; ay: number; az: number;
  errorBefore: number; errorAfter: number; standardised: number | null; outlier: boolean;
}
const toPose = (r: Row): FitPoseRow => ({
  order: r.idx + 1,
  label: r.label,
  line: r.line,
  role: r.role,
  before: [r.bx, r.by, r.bz],
  after: [r.ax, r.ay, r.az],
  errorBefore: r.errorBefore,
  errorAfter: r.errorAfter,
  standardised: r.standardised,
  outlier: r.outlier,
});

/** Legacy reports (before the split) carry their poses in fits.report; undefined when the fit is unknown. */
async function fitState(fitId: string, database: Db) {
  const [row] = await database
    .select({ state: fits.state, legacy: sql<boolean>`(${fits.report} ? 'poses')` })
    .from(fits)
    .where(eq(fits.id, fitId));
  return row;
}

async function legacyPoses(fitId: string, database: Db): Promise<FitPoseRow[]> {
  const [row] = await database.select({ poses: sql<PoseResidual[]>`${fits.report} -> 'poses'` }).from(fits).where(eq(fits.id, fitId));
  return (row?.poses ?? []).map((p, i) => ({ order: i + 1, ...p }));
}

/** One page of a fit's poses; undefined for an unknown fit. A fit not fitted yet has none. */
export async function fitPosePage(
  fitId: string,
  q: FitPosePage,
  database: Db = sharedDb(),
): Promise<{ poses: FitPoseRow[]; total: number; page: number; pageSize: number; order: FitPosePage['order'] } | undefined> {
  const f = await fitState(fitId, database);
  if (!f) return undefined;
  const offset = (q.page - 1) * q.pageSize;
  if (f.legacy) {
    const all = await legacyPoses(fitId, database);
    const sorted = q.order === 'largest' ? all.slice().sort((a, b) => b.errorAfter - a.errorAfter || a.order - b.order) : all;
    return { poses: sorted.slice(offset, offset + q.pageSize), total: all.length, page: q.page, pageSize: q.pageSize, order: q.order };
  }
  const [{ total } = { total: 0 }] = await database.select({ total: count() }).from(fitPoses).where(eq(fitPoses.fitId, fitId));
  const base = database.select(columns).from(fitPoses);
  const rows =
    q.order === 'file'
      ? await base.where(and(eq(fitPoses.fitId, fitId), sql`${fitPoses.idx} >= ${offset}`)).orderBy(asc(fitPoses.idx)).limit(q.pageSize)
      : await base.where(eq(fitPoses.fitId, fitId)).orderBy(desc(fitPoses.errorAfter), asc(fitPoses.idx)).limit(q.pageSize).offset(offset);
  return { poses: rows.map(toPose), total, page: q.page, pageSize: q.pageSize, order: q.order };
}

/** Every pose of a fit in file order, in chunks (for the CSV download and the certificate). */
export async function* fitPoseChunks(fitId: string, database: Db = sharedDb(), chunk = 10_000): AsyncGenerator<FitPoseRow[]> {
  const f = await fitState(fitId, database);
  if (!f) return;
  if (f.legacy) {
    yield await legacyPoses(fitId, database);
    return;
  }
  for (let from = 0; ; from += chunk) {
    const rows = await database
      .select(columns)
      .from(fitPoses)
      .where(and(eq(fitPoses.fitId, fitId), sql`${fitPoses.idx} >= ${from}`, sql`${fitPoses.idx} < ${from + chunk}`))
      .orderBy(asc(fitPoses.idx));
    if (!rows.length) return;
    yield rows.map(toPose);
  }
}

/** Every pose of a fit (server-side consumers that need them all at once). */
export async function allFitPoses(fitId: string, database: Db = sharedDb()): Promise<FitPoseRow[]> {
  const out: FitPoseRow[] = [];
  for await (const part of fitPoseChunks(fitId, database)) out.push(...part);
  return out;
}

/** Measured poses of a session at given file positions (0-based idx): what the fit's 3-D view draws. */
export async function sessionPosesAt(sessionId: string, idx: readonly number[], database: Db = sharedDb()) {
  if (!idx.length) return [];
  return database
    .select({ label: sessionPoses.label, line: sessionPoses.line, q: sessionPoses.q, x: sessionPoses.x, y: sessionPoses.y, z: sessionPoses.z })
    .from(sessionPoses)
    .where(and(eq(sessionPoses.sessionId, sessionId), sql`${sessionPoses.idx} = any(${arrayParam(pgArray.int(idx), 'int[]')})`))
    .orderBy(asc(sessionPoses.idx));
}
