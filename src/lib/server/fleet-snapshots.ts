/**
 * Fleet statistics served from snapshots. Judging every unit against the others is too much work for a
 * request at thousands of units (src/lib/engine/fleet-judgement.ts is leave-one-out per unit and parameter,
 * and the position error samples every unit), so a pg-boss job (`fleet-snapshot`, one queued and one
 * running per arm model) computes it with `fleetStatistics` and stores the result: one summary row and one
 * row per unit in page order (flagged first, then by serial). Requests read one page of it.
 *
 * The rule the page states: a snapshot is computed from the model's current approved sets and its judgement
 * settings as they were when the job started. Its fingerprint (the model's fleet inputs version, raised by
 * database triggers on every such change) is compared on every read with the version now; when they
 * differ a newer computation is pending and queued (approvals and settings changes also queue it at once),
 * and until it is stored the previous snapshot is served, marked as such. A model without any snapshot
 * queues its first computation and the request waits for it a bounded time.
 */
import { and, asc, desc, eq, gt, inArray, lte, ne } from 'drizzle-orm';
import type PgBoss from 'pg-boss';
import { z } from 'zod';
import { armModelRevisions, armModels, fits, fleetSnapshots, fleetSnapshotUnits, units } from '../../db/schema';
import type { FleetOutside, FleetPage, FleetSnapshotSummary, FleetUnitResult } from '../shared/fleet-view';
import { db as sharedDb, type Db } from './db';
import { fleetStatistics } from './fleet';
import { ensureQueue, jobQueue, startWhenReady } from './job-queue';
import { log } from './log';

export const FLEET_SNAPSHOT_QUEUE = 'fleet-snapshot';

/** How long a request waits for a model's first snapshot before answering "being computed". */
export const FIRST_SNAPSHOT_WAIT_MS = 20_000;

export const SNAPSHOT_RULE =
  'Computed by a background job from the current approved sets and the judgement settings as they were when it started. ' +
  "When a unit's current set or the model's judgement settings change, a new computation is queued; until it is stored, the previous figures are shown and marked as pending.";

export const fleetQuerySchema = z.strictObject({
  page: z.coerce.number({ error: 'page must be a whole number from 1' }).int('page must be a whole number from 1').min(1, 'page must be a whole number from 1').max(100000, 'page is at most 100000').default(1),
  pageSize: z.coerce.number({ error: 'pageSize must be a whole number' }).int('pageSize must be a whole number').min(1, 'pageSize must be 1 to 200').max(200, 'pageSize must be 1 to 200').default(25),
});
export type FleetQuery = z.infer<typeof fleetQuerySchema>;

/**
 * What a snapshot depends on: the model's fleet inputs version, which database triggers raise whenever a set
 * of one of its units is approved or changes state, or its judgement settings change (migration 0015), so
 * also for changes made outside this code. One primary-key read.
 */
export async function fleetFingerprint(modelId: string, database: Db = sharedDb()): Promise<string> {
  const [row] = await database.select({ version: armModels.fleetInputsVersion }).from(armModels).where(eq(armModels.id, modelId));
  return fingerprintOf(row?.version ?? 0);
}
const fingerprintOf = (version: number) => `inputs=${version}`;

/** Compute the model's fleet statistics now and store them as its snapshot (the job's work). */
export async function computeFleetSnapshot(modelId: string, database: Db = sharedDb()) {
  const started = performance.now();
  const fingerprint = await fleetFingerprint(modelId, database);
  const stats = await fleetStatistics(modelId, database);
  if (!stats) return undefined;
  const durationMs = Math.round(performance.now() - started);
  const { units: rows, outside, ...rest } = stats;
  const summary: FleetSnapshotSummary = { ...rest, outsideCount: outside.length };
  const ordered = [...rows].sort((a, b) => Number(b.flagged) - Number(a.flagged) || (a.serial < b.serial ? -1 : a.serial > b.serial ? 1 : 0));
  const id = await database.transaction(async (tx) => {
    const [snap] = await tx.insert(fleetSnapshots).values({ modelId, fingerprint, durationMs, unitCount: rows.length, summary }).returning({ id: fleetSnapshots.id });
    for (let i = 0; i < ordered.length; i += 500) {
      await tx.insert(fleetSnapshotUnits).values(
        ordered.slice(i, i + 500).map(({ needsAttention: _n, ...u }, k) => ({ snapshotId: snap!.id, rank: i + k + 1, unitId: u.unitId, serial: u.serial, flagged: u.flagged, data: u })),
      );
    }
    // Only the newest snapshot of a model is kept (its rows go with it).
    await tx.delete(fleetSnapshots).where(and(eq(fleetSnapshots.modelId, modelId), ne(fleetSnapshots.id, snap!.id)));
    return snap!.id;
  });
  log('info', 'fleet snapshot', { modelId, units: rows.length, durationMs, totalMs: Math.round(performance.now() - started) });
  return { id, fingerprint, durationMs, unitCount: rows.length };
}

async function queue(): Promise<PgBoss> {
  const boss = await jobQueue();
  // stately: at most one queued and one running computation per model (singletonKey = model id), so a burst
  // of approvals while one runs leaves exactly one more to do.
  await ensureQueue(boss, { name: FLEET_SNAPSHOT_QUEUE, policy: 'stately', retryLimit: 2, retryDelay: 5, expireInSeconds: 30 * 60 });
  return boss;
}

const localWorkers: string[] = [];
const lastQueued = new Map<string, number>();

/** Queue a computation of the model's snapshot (at most one request to the queue per model and 3 s from this process). */
export async function queueFleetSnapshot(modelId: string): Promise<void> {
  const now = Date.now();
  if (now - (lastQueued.get(modelId) ?? 0) < 3000) return;
  lastQueued.set(modelId, now);
  try {
    const boss = await queue();
    await boss.send(FLEET_SNAPSHOT_QUEUE, { modelId }, { singletonKey: modelId });
    for (const w of localWorkers) boss.notifyWorker(w);
  } catch (err) {
    lastQueued.delete(modelId);
    throw err;
  }
}

/** After a change of a unit's sets (approval of a fit): queue its model's snapshot; a failure is only logged (reads notice the change too). */
export async function fleetInputsChangedByFit(fitId: string, database: Db = sharedDb()): Promise<void> {
  try {
    const [row] = await database
      .select({ modelId: armModelRevisions.modelId })
      .from(fits)
      .innerJoin(units, eq(units.id, fits.unitId))
      .innerJoin(armModelRevisions, eq(armModelRevisions.id, units.modelRevisionId))
      .where(eq(fits.id, fitId));
    if (row) await queueFleetSnapshot(row.modelId);
  } catch (err) {
    log('warn', 'fleet snapshot not queued', { fitId, error: String((err as Error)?.message ?? err) });
  }
}

/** After a change of the model's judgement settings. */
export async function fleetInputsChanged(modelId: string): Promise<void> {
  await queueFleetSnapshot(modelId).catch((err) => log('warn', 'fleet snapshot not queued', { modelId, error: String((err as Error)?.message ?? err) }));
}

let starting: Promise<void> | undefined;

/** Start the snapshot worker in this process (idempotent; retried every 5 s while PostgreSQL is away). */
export function startFleetSnapshotWorker(): Promise<void> {
  starting ??= startWhenReady('fleet snapshot worker', async () => {
    const boss = await queue();
    localWorkers.push(
      await boss.work<{ modelId: string }>(FLEET_SNAPSHOT_QUEUE, { batchSize: 1, pollingIntervalSeconds: 1 }, async ([job]) => {
        const modelId = job?.data?.modelId;
        if (!modelId || !z.uuid().safeParse(modelId).success) return;
        await computeFleetSnapshot(modelId);
      }),
    );
  });
  return starting;
}

async function latestSnapshot(modelId: string, database: Db) {
  const [snap] = await database
    .select({ id: fleetSnapshots.id, fingerprint: fleetSnapshots.fingerprint, computedAt: fleetSnapshots.computedAt, durationMs: fleetSnapshots.durationMs, unitCount: fleetSnapshots.unitCount })
    .from(fleetSnapshots)
    .where(eq(fleetSnapshots.modelId, modelId))
    .orderBy(desc(fleetSnapshots.computedAt))
    .limit(1);
  return snap;
}

/**
 * A snapshot never changes once stored, so its pages are kept in memory once read (by snapshot id, page and
 * page size), parsed and serialised. Only the attention flags (read live) and the pending state vary.
 */
interface CachedPage {
  summary: FleetSnapshotSummary;
  units: FleetUnitResult[];
  outside: FleetOutside[];
  json: { summary: string; units: string[]; outside: string };
}
const pageCache = new Map<string, CachedPage>();
const PAGE_CACHE_SIZE = 200;

/** One page of a snapshot's unit rows, by rank (the primary key): tests EXPLAIN it. */
export function snapshotUnitsQuery(snapshotId: string, offset: number, pageSize: number, database: Db = sharedDb()) {
  return database
    .select({ data: fleetSnapshotUnits.data })
    .from(fleetSnapshotUnits)
    .where(and(eq(fleetSnapshotUnits.snapshotId, snapshotId), gt(fleetSnapshotUnits.rank, offset), lte(fleetSnapshotUnits.rank, offset + pageSize)))
    .orderBy(asc(fleetSnapshotUnits.rank));
}

async function cachedPage(snapshotId: string, query: FleetQuery, database: Db): Promise<CachedPage> {
  const key = `${snapshotId}:${query.page}:${query.pageSize}`;
  const hit = pageCache.get(key);
  if (hit) {
    pageCache.delete(key);
    pageCache.set(key, hit);
    return hit;
  }
  const offset = (query.page - 1) * query.pageSize;
  const [[row], rows] = await Promise.all([
    database.select({ summary: fleetSnapshots.summary }).from(fleetSnapshots).where(eq(fleetSnapshots.id, snapshotId)),
    snapshotUnitsQuery(snapshotId, offset, query.pageSize, database),
  ]);
  const summary = row!.summary;
  const unitOf = new Map(summary.parameters.map((p) => [p.key, p.unit]));
  const units = rows.map((r) => r.data);
  const outside: FleetOutside[] = units.flatMap((u) =>
    u.outside.map((key) => {
      const l = u.limits[key]!;
      return { serial: u.serial, key, unit: unitOf.get(key) ?? 'mm', deviation: u.deviations[key]!, lower: l.lower, upper: l.upper, score: u.scores[key]!, p: l.p };
    }),
  );
  const { model: _model, ...withoutModel } = summary;
  const summaryJson = JSON.stringify(withoutModel);
  const entry: CachedPage = { summary, units, outside, json: { summary: summaryJson.slice(1, -1), units: units.map((u) => JSON.stringify(u).slice(1)), outside: JSON.stringify(outside) } };
  pageCache.set(key, entry);
  if (pageCache.size > PAGE_CACHE_SIZE) pageCache.delete(pageCache.keys().next().value!);
  return entry;
}

export type FleetPageResult =
  | { state: 'missing' }
  | { state: 'computing'; model: { id: string; name: string } }
  | ({ state: 'ready'; json: () => string } & FleetPage);

/**
 * One page of an arm model's fleet statistics from its latest snapshot: the summary, the page's units
 * (flagged first, then by serial) with their attention flag as it is now, the out-of-line entries of
 * those units, and the snapshot's state. `json()` gives the same as the API's body, from cached pieces.
 */
export async function fleetPage(modelId: string, query: FleetQuery, database: Db = sharedDb(), wait: { ms: number } = { ms: FIRST_SNAPSHOT_WAIT_MS }): Promise<FleetPageResult> {
  const [row] = await database.select({ id: armModels.id, name: armModels.name, version: armModels.fleetInputsVersion }).from(armModels).where(eq(armModels.id, modelId));
  if (!row) return { state: 'missing' };
  const model = { id: row.id, name: row.name };
  let snap = await latestSnapshot(modelId, database);
  if (!snap) {
    // Queued again (at most every 3 s) while waiting, so a queue that was briefly away does not leave it undone.
    const until = Date.now() + wait.ms;
    while (!snap && Date.now() < until) {
      await queueFleetSnapshot(modelId).catch((err) => log('warn', 'fleet snapshot not queued', { modelId, error: String((err as Error)?.message ?? err) }));
      await new Promise((r) => setTimeout(r, 150));
      snap = await latestSnapshot(modelId, database);
    }
    if (!snap) return { state: 'computing', model };
  }
  const page = await cachedPage(snap.id, query, database);
  const pending = fingerprintOf(row.version) !== snap.fingerprint;
  if (pending) await queueFleetSnapshot(modelId).catch((err) => log('warn', 'fleet snapshot not queued', { modelId, error: String((err as Error)?.message ?? err) }));
  const attention = page.units.length
    ? new Map((await database.select({ id: units.id, needsAttention: units.needsAttention }).from(units).where(inArray(units.id, page.units.map((u) => u.unitId)))).map((u) => [u.id, u.needsAttention]))
    : new Map<string, boolean>();
  const unitsPage = { page: query.page, pageSize: query.pageSize, total: snap.unitCount };
  const snapshot = { computedAt: snap.computedAt.toISOString(), durationMs: snap.durationMs, pending, rule: SNAPSHOT_RULE };
  const flags = page.units.map((u) => attention.get(u.unitId) ?? false);
  return {
    state: 'ready',
    ...page.summary,
    model,
    units: page.units.map((u, i) => ({ ...u, needsAttention: flags[i]! })),
    outside: page.outside,
    unitsPage,
    snapshot,
    json: () =>
      `{${page.json.summary},"model":${JSON.stringify(model)},"units":[${page.json.units.map((u, i) => `{"needsAttention":${flags[i]},${u}`).join(',')}],` +
      `"outside":${page.json.outside},"unitsPage":${JSON.stringify(unitsPage)},"snapshot":${JSON.stringify(snapshot)}}`,
  };
}
