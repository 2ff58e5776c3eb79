/**
 * Approved parameter sets made directly in the database (arm model + revision + unit + session + fit +
 * parameter set), for the fleet, drift and export tests. The approval path itself (reviews) has its own tests;
 * these rows look exactly like the ones it writes.
 */
import { and, eq, max } from 'drizzle-orm';
import { armModelRevisions, armModels, fits, parameterSets, sessions, units, users } from '../../src/db/schema';
import type { Db } from '../../src/lib/server/db';
import type { ArmGeometry } from '../../src/lib/engine/types';
import { uniq } from './http';

type Conn = Db | Parameters<Parameters<Db['transaction']>[0]>[0];

/** Invented planar two-joint arm (DH), easy to reason about by hand; a third joint adds a prismatic axis. */
export function testArm(name = 'Test arm TP-2'): ArmGeometry {
  return {
    format: 'offsetry-arm/1',
    name,
    convention: 'dh',
    joints: [
      { name: 'J1', type: 'revolute', a: 300, alpha: 0, d: 250, theta: 0, min: -150, max: 150 },
      { name: 'J2', type: 'revolute', a: 200, alpha: 0, d: 0, theta: 0, beta: 0, min: -140, max: 140 },
      { name: 'J3', type: 'prismatic', a: 0, alpha: 180, d: 0, theta: 0, min: 0, max: 120 },
    ],
    tool: { x: 15, y: 0, z: 40, rx: 0, ry: 0, rz: 0 },
  };
}

export async function userId(database: Conn, email: string): Promise<string> {
  const [u] = await database.select({ id: users.id }).from(users).where(eq(users.email, email));
  if (!u) throw new Error(`no user ${email}: are the demo users seeded?`);
  return u.id;
}

export async function makeModel(database: Conn, nominal: ArmGeometry = testArm(), name = uniq('Test model ')) {
  const [m] = await database.insert(armModels).values({ name, manufacturer: 'Invented Arms Ltd.' }).returning({ id: armModels.id });
  const [r] = await database.insert(armModelRevisions).values({ modelId: m!.id, revision: 1, geometry: nominal }).returning({ id: armModelRevisions.id });
  return { modelId: m!.id, revisionId: r!.id, name, nominal };
}

export async function makeUnit(database: Conn, revisionId: string, serial = uniq('SN-')) {
  const [u] = await database.insert(units).values({ serial, modelRevisionId: revisionId, site: 'Test plant' }).returning({ id: units.id });
  return { unitId: u!.id, serial };
}

export interface ApproveOptions {
  unitId: string;
  revisionId: string;
  geometry: ArmGeometry;
  standardErrors?: Record<string, number | null>;
  approverEmail?: string;
  approvedAt?: Date;
}

/** A session, a fitted + approved fit and the next parameter set version (previous current → superseded). */
export async function approveSet(database: Conn, o: ApproveOptions) {
  const approver = await userId(database, o.approverEmail ?? 'engineer@example.com');
  const key = uniq('sess-');
  const [s] = await database
    .insert(sessions)
    .values({
      unitId: o.unitId, modelRevisionId: o.revisionId, measuredOn: '2026-03-02', fileName: `${key}.csv`, fileKey: `test/${key}.csv`,
      fileSha256: key.padEnd(64, '0').slice(0, 64), fileBytes: 100, poseCount: 40, jointCount: o.geometry.joints.length,
    })
    .returning({ id: sessions.id });
  const se = o.standardErrors ?? {};
  const [f] = await database
    .insert(fits)
    .values({
      sessionId: s!.id, unitId: o.unitId, state: 'fitted', settings: {}, calibrated: o.geometry, reviewState: 'approved', engineVersion: 'test',
      report: { parameters: Object.entries(se).map(([k, v]) => ({ key: k, standardError: v })) },
      createdBy: approver, decidedBy: approver, decidedAt: o.approvedAt ?? new Date(), finishedAt: o.approvedAt ?? new Date(),
    })
    .returning({ id: fits.id });
  await database.update(parameterSets).set({ state: 'superseded' }).where(and(eq(parameterSets.unitId, o.unitId), eq(parameterSets.state, 'current')));
  const [{ top } = { top: 0 }] = await database.select({ top: max(parameterSets.version) }).from(parameterSets).where(eq(parameterSets.unitId, o.unitId));
  const version = (top ?? 0) + 1;
  const [p] = await database
    .insert(parameterSets)
    .values({ unitId: o.unitId, version, fitId: f!.id, geometry: o.geometry, standardErrors: se, approvedBy: approver, approvedAt: o.approvedAt ?? new Date() })
    .returning({ id: parameterSets.id });
  return { setId: p!.id, version, fitId: f!.id, sessionId: s!.id };
}

/** The nominal with some parameters moved (keys as in the parameter layout: J1.a, J2.theta, base.x …). */
export function moved(nominal: ArmGeometry, changes: Record<string, number>): ArmGeometry {
  const g: ArmGeometry = JSON.parse(JSON.stringify(nominal));
  for (const [key, delta] of Object.entries(changes)) {
    const [owner, field] = key.split('.') as [string, string];
    if (owner === 'base' || owner === 'tool') {
      const f = (g[owner] ??= { x: 0, y: 0, z: 0, rx: 0, ry: 0, rz: 0 }) as unknown as Record<string, number>;
      f[field] = (f[field] ?? 0) + delta;
    } else {
      const j = g.joints[Number(owner.slice(1)) - 1] as unknown as Record<string, number>;
      j[field] = (j[field] ?? 0) + delta;
    }
  }
  return g;
}

/** A session and a fitted fit awaiting review (run and submitted by `byEmail`), for approval through the API. */
export async function fitAwaitingReview(database: Conn, o: { unitId: string; revisionId: string; geometry: ArmGeometry; byEmail?: string }) {
  const by = await userId(database, o.byEmail ?? 'technician@example.com');
  const key = uniq('sess-');
  const [s] = await database
    .insert(sessions)
    .values({
      unitId: o.unitId, modelRevisionId: o.revisionId, measuredOn: '2026-03-02', fileName: `${key}.csv`, fileKey: `test/${key}.csv`,
      fileSha256: key.padEnd(64, '0').slice(0, 64), fileBytes: 100, poseCount: 40, jointCount: o.geometry.joints.length,
    })
    .returning({ id: sessions.id });
  const [f] = await database
    .insert(fits)
    .values({
      sessionId: s!.id, unitId: o.unitId, state: 'fitted', settings: {}, calibrated: o.geometry, reviewState: 'awaiting_review', engineVersion: 'test',
      report: { parameters: [] }, createdBy: by, submittedBy: by, submittedAt: new Date(), finishedAt: new Date(),
    })
    .returning({ id: fits.id });
  return { fitId: f!.id };
}
