/**
 * A benchmark fleet (not the demo): N units (default 10 000) of one invented arm model, each with five approved
 * parameter sets (v1–v4 superseded, v5 current), every set with the session and the approved fit the schema
 * requires, plus an export log of earlier exports. Written in batches through `unnest` (one statement per
 * table and batch, never row by row). Reproducible from the seed: the same seed gives the same geometries,
 * serials, sites and log (row ids are random).
 *
 * The invented arm is the scale fixture's Tarn R6-420. Each unit has its own persistent deviation from
 * nominal (lengths σ 0.08 mm, angles σ 0.012°), each visit adds a small change (σ 0.01 mm / 0.002°) and a new
 * tracker placement (the base frame); about 3 % of units carry one odd parameter (a length 0.9 mm off), the
 * ones the fleet judgement should flag. Sessions carry no pose rows (nothing here reads them).
 *
 *   npx tsx scripts/fleet-fixture.ts --database-url postgres://… [--units 10000] [--seed 42] [--log 20000]
 *
 * Use a database of its own (the benchmark makes a throw-away cluster): it adds ~30 000 rows per 1 000 units.
 */
import crypto from 'node:crypto';
import postgres from 'postgres';
import { normalVariate, seededRandom } from '../src/lib/engine/random';
import type { ArmGeometry } from '../src/lib/engine/types';
import { scaleNominal } from './scale-fixture';

export const FLEET_MODEL_NAME = 'Tarn R6-420 fleet (invented benchmark model)';
export const VERSIONS = 5;
const BATCH_UNITS = 400;

export interface FleetFixture {
  modelId: string;
  revisionId: string;
  serials: string[];
  approverId: string;
  seconds: number;
  counts: { units: number; parameterSets: number; exportLog: number };
}

/** Invented serials in the demo's style (plant code, model code, running number): TFB-R6-00001 …. */
export const fleetSerial = (i: number, prefix = 'TFB') => `${prefix}-R6-${String(i).padStart(5, '0')}`;

type Sql = postgres.Sql;

function geometryFor(nominal: ArmGeometry, unitDev: number[][], visit: () => number, r: () => number): ArmGeometry {
  const g: ArmGeometry = JSON.parse(JSON.stringify(nominal));
  g.joints.forEach((j, i) => {
    const [da, dal, dd, dth, dbe] = unitDev[i]!;
    // J1's a, alpha and theta are fixed at nominal in these fits (the base frame absorbs them); MDH J3 has beta.
    if (i > 0) {
      j.a += da! + 0.01 * visit();
      j.alpha += dal! + 0.002 * visit();
      j.theta += dth! + 0.002 * visit();
    }
    j.d += dd! + 0.01 * visit();
    if (j.beta !== undefined) j.beta += dbe! + 0.002 * visit();
  });
  g.base = { x: 1500 + 1000 * r(), y: -800 + 1600 * r(), z: -300 + 200 * r(), rx: 0.2 * (r() - 0.5), ry: 0.2 * (r() - 0.5), rz: 360 * r() - 180 };
  g.tool = { x: 0.3 * visit(), y: 0.3 * visit(), z: nominal.tool!.z + 0.3 * visit(), rx: 0, ry: 0, rz: 0 };
  return g;
}

/** Seed the fleet into `sql` (a migrated database). */
export async function seedFleet(sql: Sql, options: { units?: number; seed?: number; exportLog?: number; prefix?: string; log?: (line: string) => void } = {}): Promise<FleetFixture> {
  const n = options.units ?? 10_000;
  const seed = options.seed ?? 42;
  const logRows = options.exportLog ?? 2 * n;
  const say = options.log ?? (() => {});
  const started = performance.now();
  const r = seededRandom(seed);
  const nv = () => normalVariate(r);
  const nominal = scaleNominal();
  nominal.name = FLEET_MODEL_NAME;

  const [approver] = await sql`
    insert into users (email, name, roles) values (${`fleet-approver-${seed}-${options.prefix ?? 'TFB'}@offsetry.test`}, 'Fleet Bench Engineer', '{engineer}'::text[])
    returning id`;
  const [model] = await sql`insert into arm_models (name, manufacturer, description) values (${`${FLEET_MODEL_NAME} ${options.prefix ?? ''}`.trim()}, 'Invented Arms Ltd.', 'fleet benchmark fixture') returning id`;
  const [rev] = await sql`insert into arm_model_revisions (model_id, revision, geometry) values (${model!.id}, 1, ${JSON.stringify(nominal)}::jsonb) returning id`;

  const serials = Array.from({ length: n }, (_, i) => fleetSerial(i + 1, options.prefix));
  const sites = serials.map((_, i) => `Plant ${String.fromCharCode(65 + (i % 12))} hall ${1 + (i % 7)}`);
  const cells = serials.map((_, i) => `C${String(1 + (i % 40)).padStart(2, '0')}`);
  const unitIds = serials.map(() => crypto.randomUUID());
  await sql`
    insert into units (id, serial, model_revision_id, site, cell, commissioned_on)
    select id, serial, ${rev!.id}, site, cell, date '2019-01-01' + (k % 2000)::int
    from unnest(${unitIds}::uuid[], ${serials}::text[], ${sites}::text[], ${cells}::text[]) with ordinality as t(id, serial, site, cell, k)`;
  say(`units: ${n} in ${((performance.now() - started) / 1000).toFixed(1)} s`);

  const currentSets: string[] = [];
  for (let b = 0; b < n; b += BATCH_UNITS) {
    const rows = { session: [] as string[], unit: [] as string[], measured: [] as string[], key: [] as string[], sha: [] as string[], fit: [] as string[], set: [] as string[], version: [] as number[], state: [] as string[], geometry: [] as string[], se: [] as string[], at: [] as string[] };
    for (let u = b; u < Math.min(n, b + BATCH_UNITS); u++) {
      const odd = r() < 0.03 ? 1 + Math.floor(r() * 5) : -1;
      const dev = nominal.joints.map((_, i) => [0.08 * nv() + (i === odd ? 0.9 : 0), 0.012 * nv(), 0.08 * nv(), 0.012 * nv(), 0.012 * nv()]);
      for (let v = 1; v <= VERSIONS; v++) {
        const g = geometryFor(nominal, dev, nv, r);
        const day = new Date(Date.UTC(2021, 0, 1) + ((v - 1) * 180 + (u % 150)) * 86_400_000);
        const sessionId = crypto.randomUUID();
        const setId = crypto.randomUUID();
        rows.session.push(sessionId);
        rows.unit.push(unitIds[u]!);
        rows.measured.push(day.toISOString().slice(0, 10));
        rows.key.push(`sessions/${serials[u]}/${sessionId}/visit-${v}.csv`);
        rows.sha.push(crypto.createHash('sha256').update(`${serials[u]}/${v}/${seed}`).digest('hex'));
        rows.fit.push(crypto.randomUUID());
        rows.set.push(setId);
        rows.version.push(v);
        rows.state.push(v === VERSIONS ? 'current' : 'superseded');
        rows.geometry.push(JSON.stringify(g));
        rows.se.push(JSON.stringify({ 'J2.a': 0.004, 'J3.a': 0.005, 'J4.d': 0.006, 'J2.theta': 0.0008, 'J3.theta': 0.0009 }));
        rows.at.push(new Date(day.getTime() + 3 * 86_400_000).toISOString());
        if (v === VERSIONS) currentSets.push(setId);
      }
    }
    await sql.begin(async (tx) => {
      await tx`
        insert into sessions (id, unit_id, model_revision_id, measured_on, technician, instrument, file_name, file_key, file_sha256, file_bytes, pose_count, joint_count)
        select s, u, ${rev!.id}, m::date, 'Bench Technician', 'tracker TK-1 (invented)', 'visit.csv', k, h, 24000, 240, 6
        from unnest(${rows.session}::uuid[], ${rows.unit}::uuid[], ${rows.measured}::text[], ${rows.key}::text[], ${rows.sha}::text[]) as t(s, u, m, k, h)`;
      await tx`
        insert into fits (id, session_id, unit_id, state, settings, calibrated, report, review_state, engine_version, created_by, decided_by, decided_at, finished_at, created_at)
        select f, s, u, 'fitted', '{}'::jsonb, g::jsonb, jsonb_build_object('parameters', '[]'::jsonb), 'approved', 'fleet-fixture', ${approver!.id}, ${approver!.id}, a::timestamptz, a::timestamptz, a::timestamptz
        from unnest(${rows.fit}::uuid[], ${rows.session}::uuid[], ${rows.unit}::uuid[], ${rows.geometry}::text[], ${rows.at}::text[]) as t(f, s, u, g, a)`;
      await tx`
        insert into parameter_sets (id, unit_id, version, fit_id, geometry, standard_errors, state, approved_by, approved_at)
        select p, u, v, f, g::jsonb, e::jsonb, st, ${approver!.id}, a::timestamptz
        from unnest(${rows.set}::uuid[], ${rows.unit}::uuid[], ${rows.version}::int[], ${rows.fit}::uuid[], ${rows.geometry}::text[], ${rows.se}::text[], ${rows.state}::text[], ${rows.at}::text[])
          as t(p, u, v, f, g, e, st, a)`;
    });
    if ((b / BATCH_UNITS) % 5 === 4 || b + BATCH_UNITS >= n) say(`sets: ${Math.min(n, b + BATCH_UNITS) * VERSIONS} in ${((performance.now() - started) / 1000).toFixed(1)} s`);
  }

  // Earlier exports: mostly single files, every 40th a batch of 25 units.
  for (let b = 0; b < logRows; b += 5000) {
    const kinds: string[] = [], formats: string[] = [], items: string[] = [], ats: string[] = [];
    for (let i = b; i < Math.min(logRows, b + 5000); i++) {
      const batch = i % 40 === 0;
      const count = batch ? 25 : 1;
      const list = Array.from({ length: count }, () => {
        const u = Math.floor(r() * n);
        return { serial: serials[u]!, version: VERSIONS, parameterSetId: currentSets[u]! };
      });
      kinds.push(batch ? 'batch' : 'single');
      formats.push(batch ? 'zip' : ['json', 'csv', 'urdf'][i % 3]!);
      items.push(JSON.stringify(list));
      ats.push(new Date(Date.UTC(2023, 0, 1) + i * 3_600_000).toISOString());
    }
    await sql`
      insert into export_log (user_id, kind, format, items, at)
      select ${approver!.id}, k, f, i::jsonb, a::timestamptz from unnest(${kinds}::text[], ${formats}::text[], ${items}::text[], ${ats}::text[]) as t(k, f, i, a)`;
  }
  // Fresh statistics (without them the planner misjudges the new tables' sizes), and the trigram indexes'
  // pending entries moved into the index, as autovacuum would.
  await sql`vacuum analyze units, sessions, fits, parameter_sets, export_log`;
  const seconds = (performance.now() - started) / 1000;
  say(`export log: ${logRows} entries; done in ${seconds.toFixed(1)} s`);
  return { modelId: model!.id, revisionId: rev!.id, serials, approverId: approver!.id, seconds, counts: { units: n, parameterSets: n * VERSIONS, exportLog: logRows } };
}

// Command line.
if (import.meta.url === `file://${process.argv[1]}`) {
  const argv = process.argv.slice(2);
  const opt = (name: string) => {
    const i = argv.indexOf(name);
    return i >= 0 ? argv[i + 1] : undefined;
  };
  const url = opt('--database-url') ?? process.env.FLEET_DATABASE_URL;
  if (!url) {
    console.error('fleet-fixture: --database-url postgres://… is required (a benchmark database of its own, migrated)');
    process.exit(2);
  }
  const sql = postgres(url, { max: 2, onnotice: () => {} });
  try {
    const f = await seedFleet(sql, { units: Number(opt('--units') ?? 10_000), seed: Number(opt('--seed') ?? 42), exportLog: opt('--log') ? Number(opt('--log')) : undefined, log: (l) => console.log(`[fleet-fixture] ${l}`) });
    console.log(`[fleet-fixture] model ${f.modelId}: ${f.counts.units} units, ${f.counts.parameterSets} parameter sets, ${f.counts.exportLog} export log entries in ${f.seconds.toFixed(1)} s`);
  } finally {
    await sql.end();
  }
}
