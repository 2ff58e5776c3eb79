/**
 * Units: one physical arm by serial number, on one arm model revision. Registration, the server-side
 * sorted / filtered / paginated list, the unit record with counts, its history and the pose plan for the
 * next visit.
 */
import { and, asc, count, desc, eq, ilike, inArray, like, or, sql, type SQL } from 'drizzle-orm';
import { cleanText, isCalendarDate } from '../shared/input';
import { z } from 'zod';
import { armModelRevisions, armModels, auditLog, fits, parameterSets, sessions, units, users } from '../../db/schema';
import { planPoses, type PoseSetQuality } from '../engine/planner';
import { planToCsv } from '../engine/session-csv';
import { EngineInputError, type ArmGeometry, type InputProblem } from '../engine/types';
import { audit } from './audit';
import { runEngineTask } from './engine-runner';
import type { FieldProblem } from './http';
import { db as sharedDb, type Db } from './db';
import type { UnitRow } from '../shared/unit-list';

/**
 * zod issues as field problems, naming unknown keys one by one (zod reports them as one issue at the
 * parent). Used for query strings and small JSON bodies.
 */
export function queryProblems(err: z.ZodError): FieldProblem[] {
  const out: FieldProblem[] = [];
  for (const i of err.issues) {
    const path = i.path.map(String).join('.');
    if (i.code === 'unrecognized_keys') {
      for (const k of i.keys) out.push({ field: path ? `${path}.${k}` : k, message: `unknown parameter "${k}"` });
    } else out.push({ field: path || undefined, message: i.message });
  }
  return out;
}

// Serial numbers travel in URLs (/units/{serial}); keep them to characters that need no escaping.
export const SERIAL_PATTERN = /^[A-Za-z0-9][A-Za-z0-9._-]*$/;

const dateOnly = z
  .string({ error: 'commissionedOn must be a date (YYYY-MM-DD)' })
  .regex(/^\d{4}-\d{2}-\d{2}$/, 'commissionedOn must be a date (YYYY-MM-DD)')
  .refine((s) => isCalendarDate(s), 'commissionedOn is not a calendar date from 1900 to 2199');

export const unitRegisterSchema = z.strictObject({
  serial: z
    .string({ error: 'serial is required (text)' })
    .trim()
    .min(1, 'serial must not be empty')
    .max(64, 'serial is at most 64 characters')
    .regex(SERIAL_PATTERN, 'serial may contain letters, digits, ".", "_" and "-" and must start with a letter or digit'),
  modelId: z.uuid({ error: 'modelId must be the id of an arm model' }),
  revision: z.number({ error: 'revision must be a whole number' }).int('revision must be a whole number').min(1, 'revision starts at 1').optional(),
  site: z.string({ error: 'site must be text' }).trim().overwrite((s) => cleanText(s)).max(200).default(''),
  cell: z.string({ error: 'cell must be text' }).trim().overwrite((s) => cleanText(s)).max(200).default(''),
  commissionedOn: z.union([dateOnly, z.literal(''), z.null()]).optional(),
  notes: z.string({ error: 'notes must be text' }).trim().max(4000).default(''),
});
export type UnitRegisterInput = z.infer<typeof unitRegisterSchema>;

export const UNIT_SORTS = ['serial', 'model', 'revision', 'site', 'cell', 'commissionedOn', 'createdAt'] as const;
export type UnitSort = (typeof UNIT_SORTS)[number];

const positiveInt = (what: string, max: number) =>
  z
    .string()
    .regex(/^\d{1,6}$/, `${what} must be a whole number`)
    .transform(Number)
    .pipe(z.number().int().min(1, `${what} starts at 1`).max(max, `${what} is at most ${max}`));

/** Query of GET /api/units; every parameter checked, anything unknown refused. */
export const unitListQuerySchema = z.strictObject({
  page: positiveInt('page', 100000).default(1),
  pageSize: positiveInt('pageSize', 100).default(25),
  sort: z.enum(UNIT_SORTS, { error: `sort must be one of ${UNIT_SORTS.join(', ')}` }).default('serial'),
  dir: z.enum(['asc', 'desc'], { error: 'dir must be asc or desc' }).default('asc'),
  q: z.string().trim().max(100, 'q is at most 100 characters').default(''),
  site: z.string().trim().max(200, 'site is at most 200 characters').optional(),
  model: z.uuid({ error: 'model must be the id of an arm model' }).optional(),
});
export type UnitListQuery = z.infer<typeof unitListQuerySchema>;

/** `%` and `_` are literal in a search box. */
const likeEscape = (s: string) => s.replace(/[\\%_]/g, (c) => '\\' + c);

const revisionsWhere = async (cond: SQL, database: Db) =>
  (await database.select({ id: armModelRevisions.id }).from(armModelRevisions).innerJoin(armModels, eq(armModels.id, armModelRevisions.modelId)).where(cond)).map((r) => r.id);

/**
 * A search box's text as a condition on the units table alone: serial, site or cell contains it, any case
 * (the stored lower-case `search_text`, trigram index), or the unit's arm model's name does (the few
 * matching models resolved to their revisions first).
 */
export async function unitSearchCondition(q: string, database: Db = sharedDb()): Promise<SQL> {
  const pattern = `%${likeEscape(q)}%`;
  const byModelName = await revisionsWhere(ilike(armModels.name, pattern), database);
  const any = [like(units.searchText, sql`lower(${pattern})`)];
  if (byModelName.length) any.push(inArray(units.modelRevisionId, byModelName));
  return or(...any)!;
}

/**
 * One page of units. Every condition is on the units table itself, so each can use an index: the search box
 * matches serial, site and cell through one trigram index (pg_trgm) and the model's name by resolving the few
 * matching arm models to their revisions first; the model filter is the same revision list. The total is a
 * count over units alone (no joins), not a window over the whole filtered list.
 */
/** The list's two queries (the page, the count), built but not run: listUnits runs them, tests EXPLAIN them. */
export async function unitListQueries(query: UnitListQuery, database: Db = sharedDb()) {
  const where: SQL[] = [];
  if (query.q) where.push(await unitSearchCondition(query.q, database));
  if (query.site) where.push(ilike(units.site, likeEscape(query.site)));
  if (query.model) {
    const revisions = await revisionsWhere(eq(armModels.id, query.model), database);
    where.push(revisions.length ? inArray(units.modelRevisionId, revisions) : sql`false`);
  }
  const cond = where.length ? and(...where) : undefined;
  const column = {
    serial: units.serial,
    model: armModels.name,
    revision: armModelRevisions.revision,
    site: units.site,
    cell: units.cell,
    commissionedOn: units.commissionedOn,
    createdAt: units.createdAt,
  }[query.sort];
  const order = query.dir === 'asc' ? asc(column) : desc(column);
  return {
    page: database
      .select({
        serial: units.serial,
        modelId: armModels.id,
        model: armModels.name,
        revision: armModelRevisions.revision,
        site: units.site,
        cell: units.cell,
        commissionedOn: units.commissionedOn,
        needsAttention: units.needsAttention,
        createdAt: units.createdAt,
      })
      .from(units)
      .innerJoin(armModelRevisions, eq(armModelRevisions.id, units.modelRevisionId))
      .innerJoin(armModels, eq(armModels.id, armModelRevisions.modelId))
      .where(cond)
      // Serial breaks ties so pages never overlap.
      .orderBy(order, asc(units.serial))
      .limit(query.pageSize)
      .offset((query.page - 1) * query.pageSize),
    count: database.select({ n: count() }).from(units).where(cond),
  };
}

export async function listUnits(query: UnitListQuery, database: Db = sharedDb()) {
  const q = await unitListQueries(query, database);
  const [rows, [counted]] = await Promise.all([q.page, q.count]);
  const items: UnitRow[] = rows.map((r) => ({ ...r, createdAt: r.createdAt.toISOString() }));
  return { items, total: counted?.n ?? 0, page: query.page, pageSize: query.pageSize };
}

export type RegisterResult =
  | { ok: true; unit: UnitView }
  | { ok: false; status: 400 | 404 | 409; error: string; issues: { field?: string; message: string }[] };

const duplicate = (serial: string): RegisterResult => ({
  ok: false,
  status: 409,
  error: `A unit with serial number ${serial} is already registered.`,
  issues: [{ field: 'serial', message: `serial number ${serial} is already registered; open /units/${serial} or check the number` }],
});

export async function registerUnit(input: UnitRegisterInput, actorId: string, database: Db = sharedDb()): Promise<RegisterResult> {
  try {
    const result = await database.transaction(async (tx): Promise<RegisterResult | { ok: true; id: string }> => {
      // Serials are compared without case: "lcs-r6-0101" and "LCS-R6-0101" are one plate read twice.
      const [dupe] = await tx.select({ serial: units.serial }).from(units).where(sql`lower(${units.serial}) = lower(${input.serial})`);
      if (dupe) return duplicate(dupe.serial);
      const [model] = await tx.select({ id: armModels.id }).from(armModels).where(eq(armModels.id, input.modelId));
      if (!model) return { ok: false, status: 404, error: 'No such arm model.', issues: [{ field: 'modelId', message: 'no arm model with this id' }] };
      const revWhere = input.revision === undefined ? eq(armModelRevisions.modelId, input.modelId) : and(eq(armModelRevisions.modelId, input.modelId), eq(armModelRevisions.revision, input.revision));
      const [rev] = await tx.select().from(armModelRevisions).where(revWhere).orderBy(desc(armModelRevisions.revision)).limit(1);
      if (!rev) return { ok: false, status: 400, error: `The arm model has no revision r${input.revision}.`, issues: [{ field: 'revision', message: `no revision ${input.revision} of this model` }] };
      const [u] = await tx
        .insert(units)
        .values({
          serial: input.serial,
          modelRevisionId: rev.id,
          site: input.site,
          cell: input.cell,
          commissionedOn: input.commissionedOn || null,
          notes: input.notes,
          createdBy: actorId,
        })
        .returning();
      await audit(tx, { actorId, unitId: u!.id, entityType: 'unit', entityId: u!.id, action: 'unit.registered', details: { serial: input.serial, modelId: input.modelId, revision: rev.revision } });
      return { ok: true, id: u!.id };
    });
    if (!result.ok) return result;
    if ('unit' in result) return result;
    return { ok: true, unit: (await getUnit(input.serial, database))! };
  } catch (e) {
    const code = (e as { code?: string })?.code ?? (e as { cause?: { code?: string } })?.cause?.code;
    if (code === '23505') return duplicate(input.serial);
    throw e;
  }
}

export interface UnitView {
  id: string;
  serial: string;
  site: string;
  cell: string;
  commissionedOn: string | null;
  notes: string;
  needsAttention: boolean;
  createdAt: string;
  model: { id: string; name: string; manufacturer: string; latestRevision: number };
  revision: { id: string; revision: number; geometry: ArmGeometry };
  currentParameterSet: { id: string; version: number; approvedAt: string } | null;
  counts: { sessions: number; fits: number; parameterSets: number };
}

export async function getUnit(serial: string, database: Db = sharedDb()): Promise<UnitView | undefined> {
  const [row] = await database
    .select({ u: units, r: armModelRevisions, m: armModels })
    .from(units)
    .innerJoin(armModelRevisions, eq(armModelRevisions.id, units.modelRevisionId))
    .innerJoin(armModels, eq(armModels.id, armModelRevisions.modelId))
    .where(eq(units.serial, serial));
  if (!row) return undefined;
  const unitId = row.u.id;
  // One round trip for the counts, the model's newest revision and the current set.
  const [extra] = await database
    .select({
      sessions: sql<number>`(select count(*) from ${sessions} where ${sessions.unitId} = ${unitId})`.mapWith(Number),
      fits: sql<number>`(select count(*) from ${fits} where ${fits.unitId} = ${unitId})`.mapWith(Number),
      parameterSets: sql<number>`(select count(*) from ${parameterSets} where ${parameterSets.unitId} = ${unitId})`.mapWith(Number),
      latestRevision: sql<number>`(select max(${armModelRevisions.revision}) from ${armModelRevisions} where ${armModelRevisions.modelId} = ${row.m.id})`.mapWith(Number),
      current: sql<{ id: string; version: number; approvedAt: string } | null>`(select json_build_object('id', ps.id, 'version', ps.version, 'approvedAt', ps.approved_at) from parameter_sets ps where ps.unit_id = ${unitId} and ps.state = 'current')`,
    })
    .from(sql`(select 1) as one`);
  const current = extra?.current;
  return {
    id: unitId,
    serial: row.u.serial,
    site: row.u.site,
    cell: row.u.cell,
    commissionedOn: row.u.commissionedOn,
    notes: row.u.notes,
    needsAttention: row.u.needsAttention,
    createdAt: row.u.createdAt.toISOString(),
    model: { id: row.m.id, name: row.m.name, manufacturer: row.m.manufacturer, latestRevision: extra?.latestRevision ?? row.r.revision },
    revision: { id: row.r.id, revision: row.r.revision, geometry: row.r.geometry },
    currentParameterSet: current ? { id: current.id, version: current.version, approvedAt: new Date(current.approvedAt).toISOString() } : null,
    counts: { sessions: extra?.sessions ?? 0, fits: extra?.fits ?? 0, parameterSets: extra?.parameterSets ?? 0 },
  };
}

/** Everything that happened to a unit, newest first; each list read straight from its table. */
export async function unitHistory(unitId: string, database: Db = sharedDb()) {
  const [auditRows, sessionRows, fitRows, setRows] = await Promise.all([
    database
      .select({ id: auditLog.id, at: auditLog.at, action: auditLog.action, entityType: auditLog.entityType, entityId: auditLog.entityId, comment: auditLog.comment, details: auditLog.details, actor: users.name, actorEmail: users.email })
      .from(auditLog)
      .leftJoin(users, eq(users.id, auditLog.actorId))
      .where(eq(auditLog.unitId, unitId))
      .orderBy(desc(auditLog.at))
      .limit(500),
    database
      .select({ id: sessions.id, measuredOn: sessions.measuredOn, technician: sessions.technician, instrument: sessions.instrument, fileName: sessions.fileName, poseCount: sessions.poseCount, createdAt: sessions.createdAt })
      .from(sessions)
      .where(eq(sessions.unitId, unitId))
      .orderBy(desc(sessions.measuredOn), desc(sessions.createdAt)),
    database
      .select({ id: fits.id, sessionId: fits.sessionId, state: fits.state, reviewState: fits.reviewState, createdAt: fits.createdAt, finishedAt: fits.finishedAt })
      .from(fits)
      .where(eq(fits.unitId, unitId))
      .orderBy(desc(fits.createdAt)),
    database
      .select({ id: parameterSets.id, version: parameterSets.version, state: parameterSets.state, fitId: parameterSets.fitId, approvedAt: parameterSets.approvedAt, comment: parameterSets.comment })
      .from(parameterSets)
      .where(eq(parameterSets.unitId, unitId))
      .orderBy(desc(parameterSets.version)),
  ]);
  const iso = (d: Date | null) => (d ? d.toISOString() : null);
  return {
    audit: auditRows.map((a) => ({ ...a, at: a.at.toISOString() })),
    sessions: sessionRows.map((s) => ({ ...s, createdAt: s.createdAt.toISOString() })),
    fits: fitRows.map((f) => ({ ...f, createdAt: f.createdAt.toISOString(), finishedAt: iso(f.finishedAt) })),
    parameterSets: setRows.map((p) => ({ ...p, approvedAt: p.approvedAt.toISOString() })),
  };
}

/**
 * The geometry a pose plan is made for: the current approved parameter set's when the unit has one
 * (that is where the arm really is), else the nominal revision.
 */
export async function unitPlanningGeometry(unit: UnitView, database: Db = sharedDb()): Promise<{ geometry: ArmGeometry; source: { kind: 'parameter_set'; version: number } | { kind: 'nominal'; revision: number } }> {
  if (unit.currentParameterSet) {
    const [set] = await database.select({ geometry: parameterSets.geometry, version: parameterSets.version }).from(parameterSets).where(eq(parameterSets.id, unit.currentParameterSet.id));
    if (set) return { geometry: set.geometry, source: { kind: 'parameter_set', version: set.version } };
  }
  return { geometry: unit.revision.geometry, source: { kind: 'nominal', revision: unit.revision.revision } };
}

export const PLAN_MIN_POSES = 6;
export const PLAN_MAX_POSES = 500;

const planCount = z.coerce
  .number({ error: `count must be a whole number from ${PLAN_MIN_POSES} to ${PLAN_MAX_POSES}` })
  .int(`count must be a whole number from ${PLAN_MIN_POSES} to ${PLAN_MAX_POSES}`)
  .min(PLAN_MIN_POSES, `count must be at least ${PLAN_MIN_POSES} (a plan needs at least ${PLAN_MIN_POSES} poses) and at most ${PLAN_MAX_POSES}`)
  .max(PLAN_MAX_POSES, `count must be at most ${PLAN_MAX_POSES} poses per plan (and at least ${PLAN_MIN_POSES})`);

/** Options of a pose plan, from the query string (GET) or a JSON body (POST): numbers may arrive as text. */
export const posePlanSchema = z.strictObject({
  count: planCount.default(60),
  seed: z.coerce.number({ error: 'seed must be a whole number' }).int('seed must be a whole number').min(0, 'seed must be 0 or more').max(2 ** 31 - 1, 'seed is at most 2147483647').default(1),
  format: z.enum(['csv', 'json'], { error: 'format must be csv or json' }).default('json'),
  index: z.enum(['O1', 'O3', 'O4'], { error: 'index must be O1, O3 or O4' }).default('O1'),
});
export type PosePlanOptions = z.infer<typeof posePlanSchema>;

export interface PosePlan {
  serial: string;
  count: number;
  seed: number;
  index: 'O1' | 'O3' | 'O4';
  source: { kind: 'parameter_set'; version: number } | { kind: 'nominal'; revision: number };
  joints: string[];
  /** The geometry the plan was made for (drawn by the pose plan's 3-D view). */
  geometry: ArmGeometry;
  quality: PoseSetQuality;
  poses: { label: string; q: number[] }[];
  csv: string;
  fileName: string;
}

/** Plan poses for the unit's next visit with the engine's planner; engine problems come back as a list. */
export async function posePlan(unit: UnitView, options: PosePlanOptions, database: Db = sharedDb()): Promise<{ ok: true; plan: PosePlan } | { ok: false; problems: InputProblem[] }> {
  const { geometry, source } = await unitPlanningGeometry(unit, database);
  let result: ReturnType<typeof planPoses>;
  try {
    // Hundreds of poses take seconds: planned on an engine thread, never on the request thread.
    result = await runEngineTask('planPoses', geometry, { count: options.count, seed: options.seed, index: options.index });
  } catch (e) {
    if (e instanceof EngineInputError) return { ok: false, problems: e.problems };
    throw e;
  }
  const csv = planToCsv(result.q, geometry);
  // The poses exactly as the CSV writes them (labels P01, …; joint values rounded for driving), so the JSON
  // and the download describe the same plan.
  const poses = csv
    .trimEnd()
    .split('\n')
    .slice(1)
    .map((line) => {
      const [label, ...q] = line.split(',');
      return { label: label!, q: q.map(Number) };
    });
  return {
    ok: true,
    plan: {
      serial: unit.serial,
      count: result.q.length,
      seed: options.seed,
      index: options.index,
      source,
      joints: geometry.joints.map((j) => j.name),
      geometry,
      quality: result.quality,
      poses,
      csv,
      fileName: `pose-plan-${unit.serial}-n${result.q.length}-seed${options.seed}.csv`,
    },
  };
}
