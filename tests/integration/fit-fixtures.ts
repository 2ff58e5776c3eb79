/**
 * Invented data for fit and review tests, written straight into the database: an arm model "Tarn R6-420"
 * (six axes, modified DH, made up for Offsetry), a unit, and a session whose poses are predicted by a
 * "true" geometry (nominal plus invented errors, placed in an invented tracker frame) with tracker-like
 * noise. The session's S3 object is not needed: fits read the poses from session_poses.
 */
import { createHash } from 'node:crypto';
import { armModelRevisions, armModels, sessionPoses, sessions, units } from '../../src/db/schema';
import { forwardPoint } from '../../src/lib/engine/kinematics';
import type { ArmGeometry } from '../../src/lib/engine/types';
import { createDb, type Db } from '../../src/lib/server/db';
import { uniq } from '../support/http';
import { normalVariate, seededRandom } from '../../src/lib/engine/random';
import { nominalTq6, trueTq6 } from '../support/arms';
import { waitUntil } from '../support/wait';

let shared: Db | undefined;
export function testDb(): Db {
  shared ??= createDb(process.env.DATABASE_URL!, { max: 4 });
  return shared;
}


// The engine's seeded generator, so each fixture is reproducible.
const rng = seededRandom;

export interface Fixture {
  modelId: string;
  revisionId: string;
  unitId: string;
  serial: string;
  sessionId: string;
  poseLabels: string[];
}

/**
 * A unit with one session of `count` poses. `outlier` adds a 1.5 mm error to pose P007 (a bumped target).
 * `split` marks every fifth pose 'validate'.
 */
export async function createFixture(options: { count?: number; seed?: number; outlier?: boolean; split?: boolean } = {}): Promise<Fixture> {
  const db = testDb();
  const count = options.count ?? 60;
  const r = rng(options.seed ?? 7);
  const nominal = nominalTq6();
  const truth = trueTq6();
  const [model] = await db.insert(armModels).values({ name: `Tarn R6-420 ${uniq()}`, manufacturer: 'Invented Arms Co.' }).returning();
  const [rev] = await db.insert(armModelRevisions).values({ modelId: model!.id, revision: 1, geometry: nominal }).returning();
  const serial = `TQ6-${uniq()}`;
  const [unit] = await db.insert(units).values({ serial, modelRevisionId: rev!.id, site: 'Test hall', cell: 'C1' }).returning();
  const noise = () => 0.015 * normalVariate(r);
  const poses = Array.from({ length: count }, (_, i) => {
    const q = nominal.joints.map((j) => j.min! * 0.8 + (j.max! - j.min!) * 0.8 * r());
    const p = forwardPoint(truth, q);
    const label = `P${String(i + 1).padStart(3, '0')}`;
    const bump = options.outlier && label === 'P007' ? 1.5 : 0;
    return {
      idx: i,
      line: i + 2,
      label,
      q,
      x: p[0] + noise() + bump,
      y: p[1] + noise(),
      z: p[2] + noise(),
      split: options.split ? ((i % 5 === 4 ? 'validate' : 'fit') as 'fit' | 'validate') : null,
    };
  });
  const csv = poses.map((p) => [p.label, ...p.q, p.x, p.y, p.z].join(',')).join('\n');
  const sha = createHash('sha256').update(csv).digest('hex');
  const [session] = await db
    .insert(sessions)
    .values({
      unitId: unit!.id,
      modelRevisionId: rev!.id,
      measuredOn: '2026-11-20',
      technician: 'Test technician',
      instrument: 'Invented tracker T-1',
      fileName: `${serial}.csv`,
      fileKey: `test/${serial}/${sha}.csv`,
      fileSha256: sha,
      fileBytes: csv.length,
      poseCount: count,
      jointCount: 6,
      hasSplit: !!options.split,
    })
    .returning();
  await db.insert(sessionPoses).values(poses.map((p) => ({ sessionId: session!.id, ...p })));
  return { modelId: model!.id, revisionId: rev!.id, unitId: unit!.id, serial, sessionId: session!.id, poseLabels: poses.map((p) => p.label) };
}

/** Poll GET /api/fits/{id} until the fit leaves queued/running; returns the last body and the states seen. */
export async function waitForFit(client: { json: (path: string) => Promise<{ status: number; body: any }> }, id: string, timeoutMs = 60_000) {
  const seen = new Set<string>();
  const fit = await waitUntil(
    `fit ${id} leaving queued/running`,
    async () => {
      const res = await client.json(`/api/fits/${id}`);
      if (res.status !== 200) throw new Error(`GET /api/fits/${id} answered ${res.status}: ${JSON.stringify(res.body)}`);
      seen.add(res.body.fit.state);
      return res.body.fit;
    },
    (f) => f.state === 'fitted' || f.state === 'failed',
    { timeoutMs, intervalMs: 150 },
  );
  return { fit, seen };
}
