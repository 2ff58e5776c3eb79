/**
 * The fleet-scale reads use their indexes: a benchmark fleet of 2 000 units with five sets each
 * (scripts/fleet-fixture.ts) and 10 000 more units of another model are seeded, the tables ANALYZEd, and PostgreSQL's plan of each paged query —
 * the same query builders the app runs — must not read units, parameter sets, the export log or the
 * snapshot rows from end to end (no Seq Scan on them). Paging and the cheap totals are checked through the API.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createDb } from '../../src/lib/server/db';
import { unitSetsQuery } from '../../src/lib/server/drift';
import { exportableUnitsPage, exportLogQuery } from '../../src/lib/server/exports';
import { computeFleetSnapshot, snapshotUnitsQuery } from '../../src/lib/server/fleet-snapshots';
import { unitListQueries, unitListQuerySchema, unitSearchCondition } from '../../src/lib/server/units';
import { units } from '../../src/db/schema';
import { seedFleet, type FleetFixture } from '../../scripts/fleet-fixture';
import { DEMO, signedIn, uniq } from '../support/http';
import { approveSet, makeModel, testArm } from '../support/approved-sets';
import { waitUntil } from '../support/wait';
import { scaleNominal } from '../../scripts/scale-fixture';

const db = createDb(process.env.DATABASE_URL!, { max: 2 });
afterAll(() => db.$client.end());

const UNITS = 2000;
const FILLER = 10_000;
const WATCHED = ['units', 'parameter_sets', 'export_log', 'fleet_snapshot_units'];

interface PlanNode {
  'Node Type': string;
  'Relation Name'?: string;
  'Index Name'?: string;
  Plans?: PlanNode[];
}

function nodes(plan: PlanNode): PlanNode[] {
  return [plan, ...(plan.Plans ?? []).flatMap(nodes)];
}

async function explain(query: { toSQL: () => { sql: string; params: unknown[] } } | { sql: string; params: unknown[] }) {
  const { sql, params } = 'toSQL' in query ? query.toSQL() : query;
  const [row] = await db.$client.unsafe(`explain (format json) ${sql}`, params as never[]);
  const plan = (row!['QUERY PLAN'] as { Plan: PlanNode }[])[0]!.Plan;
  return nodes(plan);
}

function expectIndexed(plan: PlanNode[], what: string, uses: string[]) {
  const seq = plan.filter((n) => n['Node Type'] === 'Seq Scan' && WATCHED.includes(n['Relation Name'] ?? ''));
  expect(seq.map((n) => n['Relation Name']), `${what}: sequential scans`).toEqual([]);
  const indexes = plan.map((n) => n['Index Name']).filter(Boolean);
  for (const name of uses) expect(indexes, `${what}: indexes used`).toContain(name);
}

describe('fleet-scale query plans', () => {
  let fleet: FleetFixture;
  let snapshotId = '';

  beforeAll(async () => {
    fleet = await seedFleet(db.$client, { units: UNITS, seed: 7, prefix: uniq('FP'), exportLog: 4000 });
    // More units without sets (another invented model), so that the units table has the size where reading
    // it whole costs more than an index lookup (at a few thousand rows a scan is the planner's right answer).
    const other = await makeModel(db, testArm('Filler arm FA-3 (invented)'));
    const tag = uniq('FL');
    await db.$client`
      insert into units (serial, model_revision_id, site, cell)
      select ${tag} || '-' || lpad(i::text, 5, '0'), ${other.revisionId}, 'Filler plant ' || (i % 9), 'F' || (i % 17)
      from generate_series(1, ${FILLER}) i`;
    snapshotId = (await computeFleetSnapshot(fleet.modelId, db))!.id;
    // VACUUM too: it also moves the trigram indexes' pending entries (GIN fast update) into the index proper,
    // as autovacuum does on a live database.
    await db.$client`vacuum analyze units, parameter_sets, export_log, fleet_snapshot_units, arm_model_revisions, arm_models`;
  }, 180_000);

  it('unit list: pages by model and a selective search are index scans', async () => {
    // A unit with a distinctive serial among the fleet's: the search box finds it through the trigram index.
    const [rev] = await db.$client`select model_revision_id as id from units where serial = ${fleet.serials[0]!}`;
    const distinctive = uniq('QZV-VARNAK-');
    await db.$client`insert into units (serial, model_revision_id, site) values (${distinctive}, ${rev!.id}, 'Test plant')`;
    await db.$client`vacuum analyze units`;
    const cases = [
      { name: 'model filter, page 3', query: { model: fleet.modelId, page: '3' }, uses: [] },
      { name: 'selective search', query: { q: 'varnak' }, uses: ['units_search_trgm'] },
      { name: 'model filter and selective search', query: { model: fleet.modelId, q: 'varnak' }, uses: ['units_search_trgm'] },
    ];
    for (const c of cases) {
      const q = await unitListQueries(unitListQuerySchema.parse(c.query), db);
      expectIndexed(await explain(q.page), `${c.name} (page)`, c.uses);
    }
    const found = await (await signedIn(DEMO.engineer)).json('/api/units?q=varnak');
    expect(found.body.items.map((u: { serial: string }) => u.serial)).toEqual([distinctive]);
  });

  it('export picker: a search matching thousands is counted up to 1 000 and paged; one matching few uses the trigram index', async () => {
    const prefix = fleet.serials[0]!.split('-')[0]!;
    const many = await exportableUnitsPage({ q: `${prefix}-`, page: 2, pageSize: 50 }, db);
    // The fleet has 2 000 units with a current set: more than the count goes.
    expect(many.total).toBe(1000);
    expect(many.totalIsLowerBound).toBe(true);
    expect(many.items.map((u) => u.serial)).toEqual(fleet.serials.slice(50, 100));
    const one = await exportableUnitsPage({ q: fleet.serials[1234]!, page: 1, pageSize: 50 }, db);
    expect(one).toMatchObject({ total: 1, totalIsLowerBound: false });
    expect(one.items.map((u) => u.serial)).toEqual([fleet.serials[1234]]);
    // Upper case in the search box finds the stored lower-case text, and LIKE's wildcards are literal.
    expect((await exportableUnitsPage({ q: fleet.serials[1234]!.toLowerCase(), page: 1, pageSize: 50 }, db)).total).toBe(1);
    expect((await exportableUnitsPage({ q: `${prefix}_`, page: 1, pageSize: 50 }, db)).total).toBe(0);
    const condition = await unitSearchCondition(fleet.serials[1234]!, db);
    expectIndexed(await explain(db.select({ id: units.id }).from(units).where(condition)), 'one serial searched', ['units_search_trgm']);
  });

  it("drift: a unit's sets through the (unit, version) index", async () => {
    const [u] = await db.$client`select id from units where serial = ${fleet.serials[10]!}`;
    expectIndexed(await explain(unitSetsQuery(u!.id, db)), 'sets of a unit', []);
  });

  it('export log: a page newest first through the (at, id) index', async () => {
    expectIndexed(await explain(exportLogQuery(4, 25, db)), 'export log page 4', ['export_log_at_id_idx']);
  });

  it('fleet statistics: a snapshot page by rank', async () => {
    expectIndexed(await explain(snapshotUnitsQuery(snapshotId, 950, 50, db)), 'snapshot page 20', ['fleet_snapshot_units_snapshot_id_rank_pk']);
  });

  it('marks the statistics pending when a set changes, until the next computation', async () => {
    const quality = await signedIn(DEMO.quality);
    const before = await quality.json(`/api/arm-models/${fleet.modelId}/fleet?pageSize=1`);
    expect(before.body.snapshot.pending).toBe(false);
    // A new current set for one unit, written straight into the database (as a restore or a script would).
    const [u] = await db.$client`select id from units where serial = ${fleet.serials[5]!}`;
    const [{ v }] = await db.$client`select fleet_inputs_version::int as v from arm_models where id = ${fleet.modelId}`;
    await approveSet(db, { unitId: u!.id, revisionId: fleet.revisionId, geometry: scaleNominal(), approverEmail: DEMO.engineer });
    const [{ v: after }] = await db.$client`select fleet_inputs_version::int as v from arm_models where id = ${fleet.modelId}`;
    expect(after).toBeGreaterThan(v);
    const stale = await quality.json(`/api/arm-models/${fleet.modelId}/fleet?pageSize=1`);
    expect(stale.body.snapshot.pending).toBe(true);
    expect(stale.body.snapshot.computedAt).toBe(before.body.snapshot.computedAt);
    // The read queued the computation; the background job stores a new snapshot with the new set.
    const fresh = await waitUntil(
      'the new fleet snapshot',
      () => quality.json(`/api/arm-models/${fleet.modelId}/fleet?pageSize=1`),
      (r) => r.body.snapshot.pending === false,
      { timeoutMs: 60_000, intervalMs: 300 },
    );
    expect(fresh.body.snapshot.computedAt > before.body.snapshot.computedAt).toBe(true);
    snapshotId = (await db.$client`select id from fleet_snapshots where model_id = ${fleet.modelId}`)[0]!.id;
  }, 90_000);

  it('pages the fleet statistics: flagged units first, every unit once, totals for the whole fleet', async () => {
    const quality = await signedIn(DEMO.quality);
    const first = await quality.json(`/api/arm-models/${fleet.modelId}/fleet?pageSize=200`);
    expect(first.status).toBe(200);
    expect(first.body.unitCount).toBe(UNITS);
    expect(first.body.unitsPage).toEqual({ page: 1, pageSize: 200, total: UNITS });
    expect(first.body.units).toHaveLength(200);
    expect(first.body.snapshot.pending).toBe(false);
    // About 3 % of the fixture's units carry an odd parameter; they come first, then the rest by serial.
    const flagged: string[] = first.body.flaggedUnits;
    expect(flagged.length).toBeGreaterThan(20);
    expect(flagged.length).toBeLessThan(200);
    const flags = first.body.units.map((u: { flagged: boolean }) => u.flagged);
    expect(flags.slice(0, flagged.length).every(Boolean)).toBe(true);
    expect(flags.slice(flagged.length).some(Boolean)).toBe(false);
    expect(first.body.units.slice(0, flagged.length).map((u: { serial: string }) => u.serial)).toEqual([...flagged].sort());
    expect(first.body.outside.length).toBe(first.body.outsideCount);
    // Walk every page: each unit exactly once.
    const seen = new Set<string>();
    for (let page = 1; page <= UNITS / 200; page++) {
      const res = await quality.json(`/api/arm-models/${fleet.modelId}/fleet?page=${page}&pageSize=200`);
      for (const u of res.body.units as { serial: string }[]) seen.add(u.serial);
      expect(res.body.units.length).toBe(200);
    }
    expect(seen.size).toBe(UNITS);
    // The response stays small however large the fleet is: a page, not the fleet.
    expect(JSON.stringify((await quality.json(`/api/arm-models/${fleet.modelId}/fleet?page=5&pageSize=20`)).body).length).toBeLessThan(150_000);
    const bad = await quality.json(`/api/arm-models/${fleet.modelId}/fleet?page=0&pageSize=500&x=1`);
    expect(bad.status).toBe(400);
    expect(bad.body.errors.map((e: { field: string }) => e.field).sort()).toEqual(['page', 'pageSize', 'x']);
  });

  it('unit list and export log: totals without reading every row on each page', async () => {
    const engineer = await signedIn(DEMO.engineer);
    const list = await engineer.json(`/api/units?model=${fleet.modelId}&page=7&pageSize=25`);
    expect(list.status).toBe(200);
    // The fleet's units and the distinctive one registered above (it sorts after them).
    expect(list.body.total).toBe(UNITS + 1);
    expect(list.body.items.map((u: { serial: string }) => u.serial)).toEqual(fleet.serials.slice(150, 175));
    const service = await signedIn(DEMO.service);
    const log = await service.json('/api/exports?page=2&pageSize=25');
    expect(log.status).toBe(200);
    expect(log.body.total).toBeGreaterThanOrEqual(4000);
    expect(log.body.entries).toHaveLength(25);
  });
});
