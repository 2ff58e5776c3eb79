/**
 * Arm models: the nominal geometry of a model type, kept in revisions r1, r2, …. A revision that a unit or
 * a session refers to is never changed: editing its geometry makes the next revision. Earlier revisions
 * stay readable (and exportable) for ever.
 */
import { and, asc, count, desc, eq, inArray, sql } from 'drizzle-orm';
import { MAX_JSON_DEPTH, jsonDepth } from '../shared/input';
import { armModelRevisions, armModels, sessions, units } from '../../db/schema';
import { parseGeometry, serializeGeometry } from '../engine/geometry';
import { EngineInputError, type ArmGeometry } from '../engine/types';
import { armModelMetaSchema, armModelUpdateMetaSchema, checkGeometryValue, engineProblemsToIssues, type FieldIssue } from '../shared/arm-model-form';
import { audit } from './audit';
import { db as sharedDb, type Db } from './db';

export interface ArmModelInput {
  name: string;
  manufacturer: string;
  description: string;
  geometry: ArmGeometry;
}

export interface ArmModelPatch {
  name?: string;
  manufacturer?: string;
  description?: string;
  note?: string;
  geometry?: ArmGeometry;
}

type Parsed<T> = { ok: true; value: T } | { ok: false; error: string; issues: FieldIssue[] };

const isObject = (v: unknown): v is Record<string, unknown> => typeof v === 'object' && v !== null && !Array.isArray(v);

/** A body whose top level is the geometry file itself (it carries the file's format tag). */
const isRawGeometry = (v: unknown) => isObject(v) && 'format' in v && 'joints' in v;

/**
 * Read a create request: `{ name, manufacturer?, description?, geometry }` or the raw arm geometry file
 * (name taken from it). A raw file is read by the engine's strict reader so problems carry the line.
 */
export function parseCreateBody(text: string, fileName = 'request body'): Parsed<ArmModelInput> {
  const value = parseJsonText(text, fileName);
  if (!value.ok) return value;
  if (isRawGeometry(value.value)) {
    try {
      const geometry = parseGeometry(text, fileName);
      return { ok: true, value: { name: geometry.name, manufacturer: '', description: '', geometry } };
    } catch (e) {
      if (e instanceof EngineInputError) return { ok: false, error: 'The arm geometry file has problems.', issues: engineProblemsToIssues(e.problems) };
      throw e;
    }
  }
  if (!isObject(value.value)) return { ok: false, error: 'Expected a JSON object.', issues: [{ message: 'the body must be a JSON object: { name, manufacturer?, description?, geometry } or an arm geometry file' }] };
  const body = value.value;
  const issues: FieldIssue[] = [];
  const unknown = Object.keys(body).filter((k) => !['name', 'manufacturer', 'description', 'geometry'].includes(k));
  for (const k of unknown) issues.push({ field: k, message: `unknown field "${k}"`, expected: 'name, manufacturer, description, geometry' });
  const meta = armModelMetaSchema.safeParse({ ...body, geometry: undefined });
  if (!meta.success) for (const i of meta.error.issues) issues.push({ field: i.path.map(String).join('.'), message: i.message });
  let geometry: ArmGeometry | undefined;
  if (body.geometry === undefined) issues.push({ field: 'geometry', message: 'geometry is required (the arm geometry file as JSON)' });
  else {
    const g = checkGeometryValue(body.geometry);
    if (g.ok) geometry = g.geometry;
    else issues.push(...g.issues);
  }
  if (issues.length || !meta.success || !geometry) return { ok: false, error: 'The arm model has problems.', issues };
  return { ok: true, value: { ...meta.data, geometry } };
}

/** Read an update request: any of name, manufacturer, description, note, geometry (a raw file is accepted too). */
export function parseUpdateBody(text: string, fileName = 'request body'): Parsed<ArmModelPatch> {
  const value = parseJsonText(text, fileName);
  if (!value.ok) return value;
  if (isRawGeometry(value.value)) {
    try {
      return { ok: true, value: { geometry: parseGeometry(text, fileName) } };
    } catch (e) {
      if (e instanceof EngineInputError) return { ok: false, error: 'The arm geometry file has problems.', issues: engineProblemsToIssues(e.problems) };
      throw e;
    }
  }
  const meta = armModelUpdateMetaSchema.safeParse(value.value);
  if (!meta.success) {
    const issues: FieldIssue[] = [];
    for (const i of meta.error.issues) {
      if (i.code === 'unrecognized_keys') for (const k of i.keys) issues.push({ field: k, message: `unknown field "${k}"`, expected: 'name, manufacturer, description, note, geometry' });
      else issues.push({ field: i.path.map(String).join('.') || undefined, message: i.message });
    }
    return { ok: false, error: 'The change has problems.', issues };
  }
  const { geometry: rawGeometry, ...rest } = meta.data;
  const patch: ArmModelPatch = { ...rest };
  if (rawGeometry !== undefined) {
    const g = checkGeometryValue(rawGeometry);
    if (!g.ok) return { ok: false, error: 'The arm geometry has problems.', issues: g.issues };
    patch.geometry = g.geometry;
  }
  if (Object.keys(patch).length === 0) return { ok: false, error: 'Nothing to change.', issues: [{ message: 'send at least one of name, manufacturer, description, note, geometry' }] };
  return { ok: true, value: patch };
}

function parseJsonText(text: string, fileName: string): Parsed<unknown> {
  if (!text.trim()) return { ok: false, error: 'The request body is empty.', issues: [{ message: 'expected a JSON object' }] };
  if (jsonDepth(text) > MAX_JSON_DEPTH) return { ok: false, error: 'The request body nests too deeply.', issues: [{ message: `arrays and objects nest more than ${MAX_JSON_DEPTH} levels deep` }] };
  try {
    return { ok: true, value: JSON.parse(text.charCodeAt(0) === 0xfeff ? text.slice(1) : text) };
  } catch {
    // Let the engine's reader locate the syntax error (line and column).
    try {
      parseGeometry(text, fileName);
    } catch (e) {
      if (e instanceof EngineInputError) return { ok: false, error: 'The request body is not valid JSON.', issues: engineProblemsToIssues(e.problems) };
    }
    return { ok: false, error: 'The request body is not valid JSON.', issues: [{ message: 'not valid JSON' }] };
  }
}

// ---------------------------------------------------------------------------------------------

export interface ArmModelSummary {
  id: string;
  name: string;
  manufacturer: string;
  description: string;
  latestRevision: number;
  convention: ArmGeometry['convention'];
  jointCount: number;
  unitCount: number;
  createdAt: string;
}

export async function listArmModels(database: Db = sharedDb()): Promise<ArmModelSummary[]> {
  const models = await database.select().from(armModels).orderBy(asc(armModels.name));
  if (models.length === 0) return [];
  const ids = models.map((m) => m.id);
  const latest = await database
    .selectDistinctOn([armModelRevisions.modelId], { modelId: armModelRevisions.modelId, revision: armModelRevisions.revision, geometry: armModelRevisions.geometry })
    .from(armModelRevisions)
    .where(inArray(armModelRevisions.modelId, ids))
    .orderBy(armModelRevisions.modelId, desc(armModelRevisions.revision));
  const unitCounts = await database
    .select({ modelId: armModelRevisions.modelId, n: count() })
    .from(units)
    .innerJoin(armModelRevisions, eq(armModelRevisions.id, units.modelRevisionId))
    .where(inArray(armModelRevisions.modelId, ids))
    .groupBy(armModelRevisions.modelId);
  const byId = new Map(latest.map((l) => [l.modelId, l]));
  const countBy = new Map(unitCounts.map((c) => [c.modelId, c.n]));
  return models.map((m) => {
    const l = byId.get(m.id);
    return {
      id: m.id,
      name: m.name,
      manufacturer: m.manufacturer,
      description: m.description,
      latestRevision: l?.revision ?? 0,
      convention: l?.geometry.convention ?? 'dh',
      jointCount: l?.geometry.joints.length ?? 0,
      unitCount: countBy.get(m.id) ?? 0,
      createdAt: m.createdAt.toISOString(),
    };
  });
}

export interface RevisionView {
  id: string;
  revision: number;
  geometry: ArmGeometry;
  note: string;
  createdAt: string;
  /** Units registered on this revision. */
  unitCount: number;
  /** Sessions checked against this revision. */
  sessionCount: number;
}

export interface ArmModelView {
  id: string;
  name: string;
  manufacturer: string;
  description: string;
  createdAt: string;
  revisions: RevisionView[];
  latest: { revision: number; geometry: ArmGeometry };
}

export async function getArmModel(id: string, database: Db = sharedDb()): Promise<ArmModelView | undefined> {
  const [m] = await database.select().from(armModels).where(eq(armModels.id, id));
  if (!m) return undefined;
  const revs = await database.select().from(armModelRevisions).where(eq(armModelRevisions.modelId, id)).orderBy(asc(armModelRevisions.revision));
  const counts = revs.length
    ? await database
        .select({ rev: units.modelRevisionId, n: count() })
        .from(units)
        .where(inArray(units.modelRevisionId, revs.map((r) => r.id)))
        .groupBy(units.modelRevisionId)
    : [];
  const sessionCounts = revs.length
    ? await database
        .select({ rev: sessions.modelRevisionId, n: count() })
        .from(sessions)
        .where(inArray(sessions.modelRevisionId, revs.map((r) => r.id)))
        .groupBy(sessions.modelRevisionId)
    : [];
  const countBy = new Map(counts.map((c) => [c.rev, c.n]));
  const sessionsBy = new Map(sessionCounts.map((c) => [c.rev, c.n]));
  const revisions = revs.map((r) => ({
    id: r.id,
    revision: r.revision,
    geometry: r.geometry,
    note: r.note,
    createdAt: r.createdAt.toISOString(),
    unitCount: countBy.get(r.id) ?? 0,
    sessionCount: sessionsBy.get(r.id) ?? 0,
  }));
  const last = revisions[revisions.length - 1]!;
  return {
    id: m.id,
    name: m.name,
    manufacturer: m.manufacturer,
    description: m.description,
    createdAt: m.createdAt.toISOString(),
    revisions,
    latest: { revision: last.revision, geometry: last.geometry },
  };
}

const isUniqueViolation = (e: unknown) => (e as { code?: string })?.code === '23505' || (e as { cause?: { code?: string } })?.cause?.code === '23505';

export type ModelResult = { ok: true; model: ArmModelView; revision: number; newRevision: boolean } | { ok: false; status: 404 | 409; error: string; issues: FieldIssue[] };

const nameTaken = (name: string): ModelResult => ({
  ok: false,
  status: 409,
  error: `An arm model named "${name}" already exists.`,
  issues: [{ field: 'name', message: `"${name}" is taken: choose another name or edit the existing model` }],
});

/** Create a model with revision r1. */
export async function createArmModel(input: ArmModelInput, actorId: string, database: Db = sharedDb()): Promise<ModelResult> {
  try {
    const id = await database.transaction(async (tx) => {
      const [dupe] = await tx.select({ id: armModels.id }).from(armModels).where(sql`lower(${armModels.name}) = lower(${input.name})`);
      if (dupe) return undefined;
      const [m] = await tx.insert(armModels).values({ name: input.name, manufacturer: input.manufacturer, description: input.description, createdBy: actorId }).returning();
      const [r] = await tx.insert(armModelRevisions).values({ modelId: m!.id, revision: 1, geometry: input.geometry, note: 'first revision', createdBy: actorId }).returning();
      await audit(tx, { actorId, entityType: 'arm_model', entityId: m!.id, action: 'arm_model.created', details: { name: input.name, revision: 1, revisionId: r!.id, joints: input.geometry.joints.length, convention: input.geometry.convention } });
      return m!.id;
    });
    if (!id) return nameTaken(input.name);
    return { ok: true, model: (await getArmModel(id, database))!, revision: 1, newRevision: true };
  } catch (e) {
    if (isUniqueViolation(e)) return nameTaken(input.name);
    throw e;
  }
}

/**
 * Change metadata and/or geometry. A changed geometry updates the latest revision in place while nothing
 * refers to it; once a unit or a session uses it, the change becomes revision r(n+1).
 */
export async function updateArmModel(id: string, patch: ArmModelPatch, actorId: string, database: Db = sharedDb()): Promise<ModelResult> {
  try {
    const outcome = await database.transaction(async (tx) => {
      // Lock the model row so two edits cannot both create r(n+1).
      const [m] = await tx.select().from(armModels).where(eq(armModels.id, id)).for('update');
      if (!m) return { kind: 'missing' as const };
      if (patch.name !== undefined && patch.name.toLowerCase() !== m.name.toLowerCase()) {
        const [dupe] = await tx.select({ id: armModels.id }).from(armModels).where(sql`lower(${armModels.name}) = lower(${patch.name})`);
        if (dupe) return { kind: 'name' as const };
      }
      const [latest] = await tx.select().from(armModelRevisions).where(eq(armModelRevisions.modelId, id)).orderBy(desc(armModelRevisions.revision)).limit(1);
      const meta: Partial<typeof armModels.$inferInsert> = {};
      if (patch.name !== undefined) meta.name = patch.name;
      if (patch.manufacturer !== undefined) meta.manufacturer = patch.manufacturer;
      if (patch.description !== undefined) meta.description = patch.description;
      if (Object.keys(meta).length) await tx.update(armModels).set(meta).where(eq(armModels.id, id));

      let revision = latest!.revision;
      let newRevision = false;
      let inPlace = false;
      const changed = patch.geometry !== undefined && serializeGeometry(patch.geometry) !== serializeGeometry(latest!.geometry);
      if (changed) {
        const [[u], [s]] = await Promise.all([
          tx.select({ n: count() }).from(units).where(eq(units.modelRevisionId, latest!.id)),
          tx.select({ n: count() }).from(sessions).where(eq(sessions.modelRevisionId, latest!.id)),
        ]);
        const used = (u?.n ?? 0) > 0 || (s?.n ?? 0) > 0;
        if (used) {
          revision = latest!.revision + 1;
          newRevision = true;
          await tx.insert(armModelRevisions).values({ modelId: id, revision, geometry: patch.geometry!, note: patch.note ?? '', createdBy: actorId });
        } else {
          inPlace = true;
          await tx
            .update(armModelRevisions)
            .set({ geometry: patch.geometry!, ...(patch.note !== undefined ? { note: patch.note } : {}) })
            .where(and(eq(armModelRevisions.id, latest!.id)));
        }
      } else if (patch.note !== undefined) {
        await tx.update(armModelRevisions).set({ note: patch.note }).where(eq(armModelRevisions.id, latest!.id));
      }
      await audit(tx, {
        actorId,
        entityType: 'arm_model',
        entityId: id,
        action: newRevision ? 'arm_model.revised' : 'arm_model.updated',
        comment: patch.note ?? null,
        details: { revision, newRevision, geometryChanged: changed, geometryUpdatedInPlace: inPlace, fields: Object.keys(meta) },
      });
      return { kind: 'ok' as const, revision, newRevision };
    });
    if (outcome.kind === 'missing') return { ok: false, status: 404, error: 'No such arm model.', issues: [] };
    if (outcome.kind === 'name') return nameTaken(patch.name!);
    return { ok: true, model: (await getArmModel(id, database))!, revision: outcome.revision, newRevision: outcome.newRevision };
  } catch (e) {
    if (isUniqueViolation(e)) return patch.name ? nameTaken(patch.name) : { ok: false, status: 409, error: 'Another edit of this model happened at the same time; reload and try again.', issues: [] };
    throw e;
  }
}

/** The arm geometry file of a revision (latest when not given), full precision, and a file name for it. */
export async function geometryFile(id: string, revision?: number, database: Db = sharedDb()) {
  const [m] = await database.select({ name: armModels.name }).from(armModels).where(eq(armModels.id, id));
  if (!m) return undefined;
  const where = revision === undefined ? eq(armModelRevisions.modelId, id) : and(eq(armModelRevisions.modelId, id), eq(armModelRevisions.revision, revision));
  const [r] = await database.select().from(armModelRevisions).where(where).orderBy(desc(armModelRevisions.revision)).limit(1);
  if (!r) return { model: m.name, missingRevision: revision };
  const safe = m.name.replace(/[^A-Za-z0-9._-]+/g, '-').replace(/^-+|-+$/g, '') || 'arm-model';
  return { model: m.name, revision: r.revision, fileName: `${safe}-r${r.revision}.json`, text: serializeGeometry(r.geometry) };
}

/** Revisions of every model, for pickers (unit registration). */
export async function listModelRevisions(database: Db = sharedDb()) {
  const rows = await database
    .select({ modelId: armModels.id, name: armModels.name, revisionId: armModelRevisions.id, revision: armModelRevisions.revision })
    .from(armModelRevisions)
    .innerJoin(armModels, eq(armModels.id, armModelRevisions.modelId))
    .orderBy(asc(armModels.name), asc(armModelRevisions.revision));
  const out = new Map<string, { id: string; name: string; revisions: number[] }>();
  for (const r of rows) {
    const m = out.get(r.modelId) ?? { id: r.modelId, name: r.name, revisions: [] };
    m.revisions.push(r.revision);
    out.set(r.modelId, m);
  }
  return [...out.values()];
}

/** The request body as text with a size cap (geometry files are small; 1 MiB is generous). */
export async function readBodyText(request: Request, maxBytes = 1024 * 1024): Promise<{ ok: true; text: string } | { ok: false; status: 413; error: string }> {
  const length = Number(request.headers.get('content-length') ?? 0);
  const tooBig = { ok: false as const, status: 413 as const, error: `Request body over ${maxBytes} bytes.` };
  if (length > maxBytes) return tooBig;
  const text = await request.text();
  if (text.length > maxBytes) return tooBig;
  return { ok: true, text };
}
