/**
 * Measurement sessions: the reads behind the session pages and API (list, one session, its file, its poses
 * page by page) and the display helpers for sessions.
 *
 * Elsewhere: the upload form and its answers in session-form.ts, reading an upload in session-intake.ts,
 * writing a session (S3 + rows, all-or-nothing) in session-store.ts, the engine checks of a stored session
 * in session-checks.ts.
 */
import { and, asc, count, desc, eq, sql } from 'drizzle-orm';
import type { Readable } from 'node:stream';
import { z } from 'zod';
import { armModelRevisions, armModels, sessionPoses as poseRows, sessions, units, users } from '../../db/schema';
import type { InputProblem } from '../engine/types';
import { db as sharedDb, type Db } from './db';
import { pageTotal, windowTotal } from './paging';
import { sessionUrl } from '../shared/display';
import { getObjectStream } from './s3';
import { SERIAL_PATTERN } from './units';

// ---- reads -------------------------------------------------------------------------------------------

export const sessionListQuerySchema = z.strictObject({
  unit: z.string().trim().max(64).regex(SERIAL_PATTERN, 'unit must be a serial number').optional(),
  page: z.coerce.number({ error: 'page must be a whole number' }).int('page must be a whole number').min(1, 'page starts at 1').default(1),
  pageSize: z.coerce.number({ error: 'pageSize must be a whole number' }).int('pageSize must be a whole number').min(1).max(200, 'pageSize is at most 200').default(25),
});
export type SessionListQuery = z.output<typeof sessionListQuerySchema>;

export interface SessionSummary {
  id: string;
  url: string;
  unit: string;
  measuredOn: string;
  technician: string;
  instrument: string;
  fileName: string;
  poseCount: number;
  hasSplit: boolean;
  repeatGroups: number;
  outsideLimitsOverride: boolean;
  warningCount: number;
  createdAt: string;
}

export async function listSessions(query: SessionListQuery, database: Db = sharedDb()): Promise<{ sessions: SessionSummary[]; total: number; page: number; pageSize: number }> {
  const where = query.unit ? eq(units.serial, query.unit) : undefined;
  const rows = await database
    // Only the listed columns: the list never needs the stored warnings' text or the file key.
    .select({
      s: {
        id: sessions.id,
        measuredOn: sessions.measuredOn,
        technician: sessions.technician,
        instrument: sessions.instrument,
        fileName: sessions.fileName,
        poseCount: sessions.poseCount,
        hasSplit: sessions.hasSplit,
        repeatGroups: sessions.repeatGroups,
        outsideLimitsOverride: sessions.outsideLimitsOverride,
        warningCount: sql<number>`jsonb_array_length(${sessions.warnings})`.mapWith(Number),
        createdAt: sessions.createdAt,
      },
      serial: units.serial,
      total: windowTotal(),
    })
    .from(sessions)
    .innerJoin(units, eq(units.id, sessions.unitId))
    .where(where)
    .orderBy(desc(sessions.measuredOn), desc(sessions.createdAt), asc(sessions.id))
    .limit(query.pageSize)
    .offset((query.page - 1) * query.pageSize);
  const total = await pageTotal(rows, query.page, async () => {
    const [c] = await database.select({ n: count() }).from(sessions).innerJoin(units, eq(units.id, sessions.unitId)).where(where);
    return c?.n ?? 0;
  });
  return {
    sessions: rows.map(({ s, serial }) => ({
      id: s.id,
      url: sessionUrl(s.id),
      unit: serial,
      measuredOn: s.measuredOn,
      technician: s.technician,
      instrument: s.instrument,
      fileName: s.fileName,
      poseCount: s.poseCount,
      hasSplit: s.hasSplit,
      repeatGroups: s.repeatGroups,
      outsideLimitsOverride: s.outsideLimitsOverride,
      warningCount: s.warningCount,
      createdAt: s.createdAt.toISOString(),
    })),
    total,
    page: query.page,
    pageSize: query.pageSize,
  };
}

export interface SessionView {
  id: string;
  url: string;
  fileUrl: string;
  unit: { id: string; serial: string; site: string; cell: string; url: string };
  model: { id: string; name: string; revision: number; revisionId: string };
  measuredOn: string;
  technician: string;
  instrument: string;
  instrumentUncertainty: string;
  ambientC: number | null;
  target: string;
  notes: string;
  fileName: string;
  fileSha256: string;
  fileBytes: number;
  poseCount: number;
  jointCount: number;
  hasSplit: boolean;
  repeatGroups: number;
  outsideLimitsOverride: boolean;
  warnings: InputProblem[];
  uploadedBy: { name: string; email: string } | null;
  createdAt: string;
}

async function sessionRow(id: string, database: Db) {
  const [row] = await database
    .select({ s: sessions, u: units, r: armModelRevisions, m: armModels, by: { name: users.name, email: users.email } })
    .from(sessions)
    .innerJoin(units, eq(units.id, sessions.unitId))
    .innerJoin(armModelRevisions, eq(armModelRevisions.id, sessions.modelRevisionId))
    .innerJoin(armModels, eq(armModels.id, armModelRevisions.modelId))
    .leftJoin(users, eq(users.id, sessions.uploadedBy))
    .where(eq(sessions.id, id));
  return row;
}

export async function getSession(id: string, database: Db = sharedDb()): Promise<SessionView | undefined> {
  const row = await sessionRow(id, database);
  if (!row) return undefined;
  const { s, u, r, m, by } = row;
  return {
    id: s.id,
    url: sessionUrl(s.id),
    fileUrl: `/api/sessions/${s.id}/file`,
    unit: { id: u.id, serial: u.serial, site: u.site, cell: u.cell, url: `/units/${encodeURIComponent(u.serial)}` },
    model: { id: m.id, name: m.name, revision: r.revision, revisionId: r.id },
    measuredOn: s.measuredOn,
    technician: s.technician,
    instrument: s.instrument,
    instrumentUncertainty: s.instrumentUncertainty,
    ambientC: s.ambientC,
    target: s.target,
    notes: s.notes,
    fileName: s.fileName,
    fileSha256: s.fileSha256,
    fileBytes: s.fileBytes,
    poseCount: s.poseCount,
    jointCount: s.jointCount,
    hasSplit: s.hasSplit,
    repeatGroups: s.repeatGroups,
    outsideLimitsOverride: s.outsideLimitsOverride,
    warnings: s.warnings,
    uploadedBy: by?.name ? { name: by.name, email: by.email! } : null,
    createdAt: s.createdAt.toISOString(),
  };
}

/** The original bytes, streamed from S3, with what the download headers need. */
export async function sessionFileStream(id: string, database: Db = sharedDb()): Promise<{ body: Readable; fileName: string; bytes: number; sha256: string } | undefined> {
  const [s] = await database.select({ key: sessions.fileKey, fileName: sessions.fileName, bytes: sessions.fileBytes, sha256: sessions.fileSha256 }).from(sessions).where(eq(sessions.id, id));
  if (!s) return undefined;
  const obj = await getObjectStream(s.key);
  return { body: obj.body, fileName: s.fileName, bytes: s.bytes, sha256: s.sha256 };
}

export const CHECK_ORDERS = ['file', 'largest'] as const;
export type CheckOrder = (typeof CHECK_ORDERS)[number];

/** Query of GET /api/sessions/{id}/check: a page of the per-pose errors, in file order or largest first. */
export const sessionCheckQuerySchema = z.strictObject({
  page: z.coerce.number({ error: 'page must be a whole number from 1' }).int('page must be a whole number from 1').min(1, 'page must be a whole number from 1').default(1),
  pageSize: z.coerce.number({ error: 'pageSize must be a whole number' }).int('pageSize must be a whole number').min(1, 'pageSize must be 1 to 1000').max(1000, 'pageSize must be 1 to 1000').default(500),
  order: z.enum(CHECK_ORDERS, { error: `order must be one of ${CHECK_ORDERS.join(', ')}` }).default('file'),
});
export type SessionCheckQuery = z.infer<typeof sessionCheckQuerySchema>;

export const posePageSchema = z.strictObject({
  page: z.coerce.number({ error: 'page must be a whole number' }).int('page must be a whole number').min(1, 'page starts at 1').default(1),
  pageSize: z.coerce.number({ error: 'pageSize must be a whole number' }).int('pageSize must be a whole number').min(1).max(1000, 'pageSize is at most 1000').default(50),
});

export interface PoseRow {
  idx: number;
  line: number;
  label: string;
  q: number[];
  x: number;
  y: number;
  z: number;
  split: 'fit' | 'validate' | null;
  outsideLimits: boolean;
}

export async function sessionPoses(id: string, page: { page: number; pageSize: number }, database: Db = sharedDb()): Promise<{ poses: PoseRow[]; total: number; page: number; pageSize: number } | undefined> {
  const [s] = await database.select({ n: sessions.poseCount }).from(sessions).where(eq(sessions.id, id));
  if (!s) return undefined;
  const rows = await database
    .select({ idx: poseRows.idx, line: poseRows.line, label: poseRows.label, q: poseRows.q, x: poseRows.x, y: poseRows.y, z: poseRows.z, split: poseRows.split, outsideLimits: poseRows.outsideLimits })
    .from(poseRows)
    .where(and(eq(poseRows.sessionId, id), sql`${poseRows.idx} >= ${(page.page - 1) * page.pageSize}`))
    .orderBy(asc(poseRows.idx))
    .limit(page.pageSize);
  return { poses: rows, total: s.n, page: page.page, pageSize: page.pageSize };
}

/** Every pose of a session in file order, as the engine takes them. */
export async function allSessionPoses(id: string, database: Db = sharedDb()) {
  const rows = await database
    .select({ line: poseRows.line, label: poseRows.label, q: poseRows.q, x: poseRows.x, y: poseRows.y, z: poseRows.z, split: poseRows.split })
    .from(poseRows)
    .where(eq(poseRows.sessionId, id))
    .orderBy(asc(poseRows.idx));
  return rows.map((r) => ({ label: r.label, line: r.line, q: r.q, x: r.x, y: r.y, z: r.z, ...(r.split ? { split: r.split } : {}) }));
}
