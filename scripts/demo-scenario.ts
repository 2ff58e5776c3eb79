/**
 * The invented demo scenario: a calibration service company ("Larkspur Cell Services", invented) looking
 * after two invented arm models at invented customer sites, with several measurement sessions per unit over
 * the last two years. Every session is generated with the engine from an invented "true" geometry (the
 * nominal plus small per-unit errors, drifting a little between visits; one unit drifts clearly more) and
 * tracker-like noise, then stored through the same path as an upload (S3 object + rows).
 *
 * Deterministic (seeded), so a re-run produces the same files and skips everything that exists.
 * Called by scripts/seed.ts; no real company, robot or parameter set is imitated.
 */
import { and, eq } from 'drizzle-orm';
import { createHash } from 'node:crypto';
import { armModelRevisions, armModels, sessions, units, users } from '../src/db/schema';
import { forwardPoint } from '../src/lib/engine/kinematics';
import { parseSessionCsv, sessionToCsv } from '../src/lib/engine/session-csv';
import type { ArmGeometry, FrameSpec, SessionPose } from '../src/lib/engine/types';
import type { Db } from '../src/lib/server/db';
import { storeSession } from '../src/lib/server/session-store';
import { seededRandom } from '../src/lib/engine/random';

export const DEMO_COMPANY = 'Larkspur Cell Services';

/** 6-axis articulated arm, modified DH, beta on the nearly parallel joint 2 → 3 (invented numbers). */
const R6: ArmGeometry = {
  format: 'offsetry-arm/1',
  name: 'Orrin R6-560',
  convention: 'mdh',
  joints: [
    { name: 'J1', type: 'revolute', a: 0, alpha: 0, d: 420, theta: 0, min: -170, max: 170 },
    { name: 'J2', type: 'revolute', a: 75, alpha: -90, d: 0, theta: -90, min: -120, max: 80 },
    { name: 'J3', type: 'revolute', a: 560, alpha: 0, d: 0, theta: 0, beta: 0, min: -110, max: 150 },
    { name: 'J4', type: 'revolute', a: 35, alpha: -90, d: 515, theta: 0, min: -180, max: 180 },
    { name: 'J5', type: 'revolute', a: 0, alpha: 90, d: 0, theta: 0, min: -120, max: 120 },
    { name: 'J6', type: 'revolute', a: 0, alpha: -90, d: 90, theta: 0, min: -350, max: 350 },
  ],
  tool: { x: 0, y: 0, z: 125, rx: 0, ry: 0, rz: 0 },
};

/** 4-axis arm with a prismatic third axis (SCARA-like), standard DH (invented numbers). */
const S4: ArmGeometry = {
  format: 'offsetry-arm/1',
  name: 'Orrin S4-550',
  convention: 'dh',
  joints: [
    { name: 'J1', type: 'revolute', a: 325, alpha: 0, d: 380, theta: 0, min: -150, max: 150 },
    { name: 'J2', type: 'revolute', a: 225, alpha: 180, d: 0, theta: 0, min: -150, max: 150 },
    { name: 'J3', type: 'prismatic', a: 0, alpha: 0, d: 0, theta: 0, min: 0, max: 200 },
    { name: 'J4', type: 'revolute', a: 0, alpha: 0, d: 40, theta: 0, min: -360, max: 360 },
  ],
  tool: { x: 30, y: 0, z: 70, rx: 0, ry: 0, rz: 0 },
};

const MODELS = [
  { geometry: R6, description: 'Six-axis articulated arm, 560 mm upper arm (invented demo model).' },
  { geometry: S4, description: 'Four-axis arm with a prismatic vertical axis (invented demo model).' },
];

const SITES = [
  ['Brackwater Components, Hall 2', 'C-04'],
  ['Brackwater Components, Hall 2', 'C-07'],
  ['Millbrook Assembly, Line A', 'A-1'],
  ['Millbrook Assembly, Line A', 'A-3'],
  ['Teasdale Foundry', 'Cell 9'],
  ['Quillan Packaging', 'Palletiser 2'],
] as const;

export interface DemoUnit {
  serial: string;
  model: ArmGeometry;
  site: readonly [string, string];
  commissionedOn: string;
  visits: number;
  /** Extra drift per visit (mm for lengths, deg for angles) — one unit drifts clearly. */
  drift: number;
  /**
   * A lasting difference from the rest of the fleet (joint index → field → offset, mm / deg): the fleet
   * view's one genuinely odd unit (LCS-R6-0107: its upper arm was replaced by a part 1.8 mm longer).
   */
  odd?: Record<number, Partial<Record<'a' | 'd' | 'alpha' | 'theta', number>>>;
}

export const UNITS: DemoUnit[] = [
  ...['LCS-R6-0101', 'LCS-R6-0102', 'LCS-R6-0103', 'LCS-R6-0104', 'LCS-R6-0105', 'LCS-R6-0106', 'LCS-R6-0107', 'LCS-R6-0108'].map((serial, k) => ({
    serial,
    model: R6,
    site: SITES[k % SITES.length]!,
    commissionedOn: `20${21 + (k % 3)}-0${1 + (k % 9)}-1${k % 10}`,
    visits: 3 + (k % 2),
    drift: serial === 'LCS-R6-0104' ? 1 : 0,
    ...(serial === 'LCS-R6-0107' ? { odd: { 2: { a: 1.8 } } } : {}),
  })),
  ...['LCS-S4-0201', 'LCS-S4-0202', 'LCS-S4-0203', 'LCS-S4-0204'].map((serial, k) => ({
    serial,
    model: S4,
    site: SITES[(k + 2) % SITES.length]!,
    commissionedOn: `2022-1${k % 3}-0${k + 2}`,
    visits: 3 + ((k + 1) % 2),
    drift: 0,
  })),
];

const TECHNICIANS = ['Tomás Reyes', 'Aiyana Brook', 'Jonas Feld'];
const TRACKERS = ['tracker LT-07', 'tracker LT-11'];
/** What each demo tracker's (invented) certificate states, in the way such certificates write it. */
const TRACKER_UNCERTAINTY = ['±(15 µm + 6 µm/m), k = 2', '±(10 µm + 5 µm/m), k = 2'];

/** The engine's seeded generator, so the same scenario (and the same file hashes) comes out each run. */
function rng(seed: number) {
  const next = seededRandom(seed);
  // Box–Muller for normal deviates.
  const normal = () => Math.sqrt(-2 * Math.log(1 - next())) * Math.cos(2 * Math.PI * next());
  return { next, normal, between: (a: number, b: number) => a + (b - a) * next() };
}

const seedOf = (s: string) => [...s].reduce((h, c) => Math.imul(h ^ c.charCodeAt(0), 16777619) >>> 0, 2166136261);

/** The unit's "true" geometry at visit v: nominal + fixed per-unit errors + a slow drift. */
export function trueGeometry(unit: DemoUnit, visit: number): ArmGeometry {
  const r = rng(seedOf(unit.serial));
  const g: ArmGeometry = structuredClone(unit.model);
  const driftR = rng(seedOf(unit.serial + ':drift'));
  g.joints = g.joints.map((j, k) => {
    // Tenths of a millimetre and hundredths of a degree: typical of a well-built arm (common practice).
    const out = {
      ...j,
      a: j.a + 0.25 * r.normal(),
      d: j.d + 0.25 * r.normal(),
      alpha: j.alpha + 0.02 * r.normal(),
      theta: j.theta + 0.03 * r.normal(),
      ...(j.beta !== undefined ? { beta: j.beta + 0.02 * r.normal() } : {}),
    };
    // Slow wear between visits; the drifting unit loses its joint-2 zero and stretches link 3.
    const walk = 0.01 * visit;
    out.theta += walk * driftR.normal() + (k === 1 ? unit.drift * 0.06 * visit : 0);
    if (k === 2) out.a += unit.drift * 0.3 * visit;
    for (const [field, offset] of Object.entries(unit.odd?.[k] ?? {})) out[field as 'a'] += offset;
    return out;
  });
  const t = g.tool!;
  g.tool = { ...t, x: t.x + 0.2 * r.normal(), y: t.y + 0.2 * r.normal(), z: t.z + 0.3 * r.normal() };
  return g;
}

/** One visit's CSV: 60–80 poses within 85 % of the joint ranges, a few repeat visits, maybe a split column. */
export function visitCsv(unit: DemoUnit, visit: number): string {
  const r = rng(seedOf(`${unit.serial}:visit:${visit}`));
  const truth = trueGeometry(unit, visit);
  // Where the tracker stood: a few metres away, levelled, any heading.
  const base: FrameSpec = { x: r.between(1400, 2400), y: r.between(-900, 900), z: r.between(-200, 300), rx: 0.01 * r.normal(), ry: 0.01 * r.normal(), rz: r.between(-180, 180) };
  const measured = { ...truth, base };
  const sigma = r.between(0.01, 0.03);
  const count = 60 + Math.floor(r.next() * 21);
  const withSplit = visit % 4 !== 2;
  const poses: SessionPose[] = [];
  const round = (v: number, k: number) => Number(v.toFixed(k));
  const measure = (label: string, q: number[]) => {
    const [x, y, z] = forwardPoint(measured, q);
    poses.push({ label, line: poses.length + 2, q, x: round(x + sigma * r.normal(), 4), y: round(y + sigma * r.normal(), 4), z: round(z + sigma * r.normal(), 4) });
  };
  const width = String(count).length;
  for (let i = 0; i < count; i++) {
    const q = unit.model.joints.map((j) => {
      const mid = ((j.min ?? -180) + (j.max ?? 180)) / 2;
      const half = (((j.max ?? 180) - (j.min ?? -180)) / 2) * 0.85;
      return round(mid + half * (2 * r.next() - 1), 3);
    });
    measure(`P${String(i + 1).padStart(width, '0')}`, q);
  }
  // Three poses visited twice more at the end (ISO 9283 repeatability style).
  for (const k of [2, Math.floor(count / 2), count - 3]) {
    const first = poses[k]!;
    for (let rep = 0; rep < 2; rep++) measure(first.label, [...first.q]);
  }
  if (withSplit) for (const p of poses) p.split = r.next() < 0.2 ? 'validate' : 'fit';
  // Repeats share the split of their label.
  if (withSplit) {
    const byLabel = new Map<string, SessionPose['split']>();
    for (const p of poses) {
      if (byLabel.has(p.label)) p.split = byLabel.get(p.label);
      else byLabel.set(p.label, p.split);
    }
  }
  return sessionToCsv(poses, unit.model.joints.length);
}

/** Visit dates over the last two years, oldest first, a little different per unit. */
function visitDates(unit: DemoUnit): string[] {
  const r = rng(seedOf(unit.serial + ':dates'));
  const now = Date.now();
  const span = 700;
  return Array.from({ length: unit.visits }, (_, v) => {
    const daysAgo = Math.round(span - (span - 20) * (v / (unit.visits - 1)) + r.between(-15, 15));
    return new Date(now - Math.max(5, daysAgo) * 86_400_000).toISOString().slice(0, 10);
  });
}

export async function seedScenario(db: Db): Promise<string> {
  const started = performance.now();
  const [tech] = await db.select({ id: users.id }).from(users).where(eq(users.email, 'technician@example.com'));
  const [eng] = await db.select({ id: users.id }).from(users).where(eq(users.email, 'engineer@example.com'));
  const revisionByModel = new Map<string, string>();
  let newModels = 0, newUnits = 0, newSessions = 0, skipped = 0;

  for (const m of MODELS) {
    let [model] = await db.select().from(armModels).where(eq(armModels.name, m.geometry.name));
    if (!model) {
      [model] = await db.insert(armModels).values({ name: m.geometry.name, manufacturer: 'Orrin Motion Works (invented)', description: m.description, createdBy: eng?.id ?? null }).returning();
      newModels++;
    }
    let [rev] = await db.select().from(armModelRevisions).where(and(eq(armModelRevisions.modelId, model!.id), eq(armModelRevisions.revision, 1)));
    if (!rev) [rev] = await db.insert(armModelRevisions).values({ modelId: model!.id, revision: 1, geometry: m.geometry, note: 'Nominal geometry from the demo data sheet', createdBy: eng?.id ?? null }).returning();
    revisionByModel.set(m.geometry.name, rev!.id);
  }

  for (const u of UNITS) {
    const revisionId = revisionByModel.get(u.model.name)!;
    let [unit] = await db.select().from(units).where(eq(units.serial, u.serial));
    if (!unit) {
      [unit] = await db
        .insert(units)
        .values({ serial: u.serial, modelRevisionId: revisionId, site: u.site[0], cell: u.site[1], commissionedOn: u.commissionedOn, notes: `Serviced by ${DEMO_COMPANY}.`, createdBy: tech?.id ?? null })
        .returning();
      newUnits++;
    }
    const dates = visitDates(u);
    for (let v = 0; v < u.visits; v++) {
      const csv = visitCsv(u, v);
      const bytes = Buffer.from(csv);
      const sha256 = createHash('sha256').update(bytes).digest('hex');
      const [exists] = await db.select({ id: sessions.id }).from(sessions).where(and(eq(sessions.unitId, unit!.id), eq(sessions.fileSha256, sha256)));
      if (exists) {
        skipped++;
        continue;
      }
      const fileName = `${u.serial}-${dates[v]}.csv`;
      const parsed = await parseSessionCsv(csv, { fileName, geometry: u.model });
      if (!parsed.ok) throw new Error(`demo scenario: generated ${fileName} does not parse: ${parsed.problems.map((p) => p.message).join('; ')}`);
      const r = rng(seedOf(fileName));
      const stored = await storeSession(
        {
          unit: { id: unit!.id, serial: u.serial, modelRevisionId: unit!.modelRevisionId },
          meta: {
            measuredOn: dates[v]!,
            technician: TECHNICIANS[(v + u.serial.length) % TECHNICIANS.length]!,
            instrument: TRACKERS[v % TRACKERS.length]!,
            instrumentUncertainty: TRACKER_UNCERTAINTY[v % TRACKERS.length]!,
            ambientC: Number(r.between(17, 27).toFixed(1)),
            target: '1.5 in SMR on the flange nest',
            notes: v === 0 ? `Visit ${v + 1} by ${DEMO_COMPANY}: baseline after commissioning.` : `Visit ${v + 1} by ${DEMO_COMPANY}.`,
          },
          fileName,
          body: () => bytes,
          bytes: bytes.length,
          sha256,
          parsed,
          outsideLimitsOverride: false,
          actorId: tech?.id ?? null,
        },
        db,
      );
      if (!stored.ok) throw new Error(`demo scenario: storing ${fileName} failed: ${stored.body.error}`);
      newSessions++;
    }
  }
  const ms = Math.round(performance.now() - started);
  return `demo scenario (${DEMO_COMPANY}): ${newModels} new arm models, ${newUnits} new units, ${newSessions} new sessions, ${skipped} sessions already there (${ms} ms)`;
}
