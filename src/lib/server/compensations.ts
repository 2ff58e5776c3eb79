/**
 * Compensated programs of a unit: upload (checked at once, stored in S3 with its row), a job that
 * compensates the program for the unit's current parameter set against its model's nominal revision and
 * stores the output in S3, the page data, the downloads (written to the export log).
 *
 * Nothing half-way: the input object is written before its row (and removed when the row's transaction
 * fails); the output object before the row is marked done (and removed when that update fails).
 * The job runs in pg-boss queue "compensate", shared by every app instance and worker process.
 */
import { and, desc, eq, inArray, sql } from 'drizzle-orm';
import { randomUUID } from 'node:crypto';
import PgBoss from 'pg-boss';
import { z } from 'zod';
import { armModelRevisions, compensations, exportLog, parameterSets, units, users, type CompensationSummary } from '../../db/schema';
import { compensateProgramAsync, parseToolOption, type CompensationResult } from '../engine/compensate';
import { compensatedCsv, parseProgramCsv, PROGRAM_MAX_BYTES } from '../engine/program-csv';
import { EngineInputError, formatProblem, type ArmGeometry, type FrameSpec, type InputProblem } from '../engine/types';
import { audit } from './audit';
import { db as sharedDb, type Db } from './db';
import type { FieldProblem } from './http';
import { ensureQueue, jobQueue, startWhenReady } from './job-queue';
import { log } from './log';
import { multipartBoundary, readMultipart } from './multipart';
import { deleteObject, getObjectBytes, putObject } from './s3';
import { sha256 } from './tokens';
import { decimatePoses } from '../../components/view3d/decimate';
import type { View3DProps } from '../../components/view3d/types';

export const COMPENSATE_QUEUE = 'compensate';
const HISTOGRAM_BINS = 20;
const LIST_CAP = 200;

type Refusal = { ok: false; status: number; body: { error: string; errors: FieldProblem[] } };
const refuse = (status: number, error: string, errors: FieldProblem[] = []): Refusal => ({ ok: false, status, body: { error, errors } });

const toProblem = (p: InputProblem): FieldProblem => ({ line: p.line, column: p.column, field: p.column, message: p.message, expected: p.expected });

/** The unit, its current set and its model's nominal revision, or undefined when the unit does not exist. */
async function unitForCompensation(serial: string, database: Db) {
  const [row] = await database
    .select({ unitId: units.id, serial: units.serial, revisionId: armModelRevisions.id, nominal: armModelRevisions.geometry })
    .from(units)
    .innerJoin(armModelRevisions, eq(armModelRevisions.id, units.modelRevisionId))
    .where(eq(units.serial, serial));
  if (!row) return undefined;
  const [set] = await database
    .select({ id: parameterSets.id, version: parameterSets.version, geometry: parameterSets.geometry })
    .from(parameterSets)
    .where(and(eq(parameterSets.unitId, row.unitId), eq(parameterSets.state, 'current')));
  return { ...row, set };
}

export const frameSchema = z.enum(['base', 'measurement'], { error: 'frame must be "base" or "measurement"' });

/**
 * Upload a program: multipart/form-data with `file` (TARGETS.csv), optional `frame` (base | measurement)
 * and `tool` (x,y,z[,rx,ry,rz] in the flange frame). 202 with the new compensation's id.
 */
export async function createCompensation(request: Request, serial: string, actorId: string, database: Db = sharedDb()): Promise<{ ok: true; status: 202; body: { id: string; url: string } } | Refusal> {
  const unit = await unitForCompensation(serial, database);
  if (!unit) return refuse(404, `No unit with serial number ${serial}.`);
  if (!unit.set) return refuse(409, `Unit ${serial} has no approved parameter set: a program can only be compensated for a current set.`, [{ field: 'unit', message: 'no current parameter set', expected: 'a unit with an approved parameter set' }]);
  const boundary = multipartBoundary(request.headers.get('content-type'));
  if (!boundary || !request.body) {
    return refuse(415, 'Send the program as multipart/form-data with the CSV in the "file" field.', [{ field: 'content-type', message: 'not multipart/form-data', expected: 'multipart/form-data; boundary=…' }]);
  }
  const fields = new Map<string, string>();
  let file: { name: string; bytes: Buffer } | undefined;
  try {
    for await (const part of readMultipart(request.body as unknown as AsyncIterable<Uint8Array>, boundary)) {
      const chunks: Buffer[] = [];
      let size = 0;
      for await (const c of part.data) {
        size += c.length;
        if (size > PROGRAM_MAX_BYTES) {
          return refuse(413, `The program is larger than ${PROGRAM_MAX_BYTES / 1024 / 1024} MiB.`, [{ field: part.name, message: 'too large', expected: `at most ${PROGRAM_MAX_BYTES / 1024 / 1024} MiB` }]);
        }
        chunks.push(c);
      }
      if (part.name === 'file' && part.filename !== undefined) file = { name: part.filename || 'program.csv', bytes: Buffer.concat(chunks) };
      else fields.set(part.name, Buffer.concat(chunks).toString('utf8'));
    }
  } catch (e) {
    return refuse(400, `The upload could not be read: ${(e as Error).message}.`, [{ field: 'file', message: 'malformed multipart body' }]);
  }
  const problems: FieldProblem[] = [];
  if (!file) problems.push({ field: 'file', message: 'no file was sent', expected: 'the program CSV in the "file" field' });
  const frame = frameSchema.safeParse((fields.get('frame') ?? 'base').trim() || 'base');
  if (!frame.success) problems.push({ field: 'frame', message: frame.error.issues[0].message, expected: 'base or measurement' });
  let tool: FrameSpec | undefined;
  const toolText = (fields.get('tool') ?? '').trim();
  if (toolText) {
    const t = parseToolOption(toolText);
    if ('message' in t) problems.push({ field: 'tool', message: t.message, expected: t.expected });
    else tool = t;
  }
  if (frame.success && frame.data === 'measurement' && !unit.set.geometry.base) {
    problems.push({ field: 'frame', message: 'the current parameter set has no base frame, so targets in the measurement frame cannot be placed', expected: 'base' });
  }
  if (problems.length || !file) return refuse(400, 'The program cannot be compensated.', problems);
  const name = file.name.replace(/[^\w.\- ]+/g, '_').slice(0, 120);
  if (file.bytes.includes(0)) return refuse(400, `${name} is not a text file.`, [{ field: 'file', message: 'the file contains NUL bytes', expected: 'a UTF-8 CSV text file' }]);
  const text = new TextDecoder('utf-8', { fatal: false }).decode(file.bytes);
  const parsed = parseProgramCsv(text, name, unit.set.geometry.joints.length);
  if (!parsed.ok) return refuse(400, `${name} cannot be read as a program (${parsed.problems.length}${parsed.truncated ? '+' : ''} problem${parsed.problems.length === 1 ? '' : 's'}).`, parsed.problems.map(toProblem));

  const id = await storeCompensation({ unitId: unit.unitId, parameterSetId: unit.set.id, nominalRevisionId: unit.revisionId, frame: frame.data!, tool, name, bytes: file.bytes, targetCount: parsed.targets.length, actorId }, database);
  await enqueueCompensation(id).catch((err) => log('warn', 'compensation not queued; the sweep will queue it', { id, error: String(err) }));
  return { ok: true, status: 202, body: { id, url: `/compensations/${id}` } };
}

/** Store a checked program: S3 object first, then its row and audit entry in one transaction (object removed if that fails). */
export async function storeCompensation(
  o: { unitId: string; parameterSetId: string; nominalRevisionId: string; frame: 'base' | 'measurement'; tool?: FrameSpec; name: string; bytes: Buffer; targetCount: number; actorId: string },
  database: Db = sharedDb(),
): Promise<string> {
  const id = randomUUID();
  const key = `compensations/${o.unitId}/${id}/input.csv`;
  const digest = sha256(o.bytes);
  await putObject(key, o.bytes, 'text/csv; charset=utf-8', { sha256: digest });
  try {
    await database.transaction(async (tx) => {
      await tx.insert(compensations).values({
        id, unitId: o.unitId, parameterSetId: o.parameterSetId, nominalRevisionId: o.nominalRevisionId, frame: o.frame, tool: o.tool ?? null,
        targetCount: o.targetCount, inputName: o.name, inputKey: key, inputSha256: digest, inputBytes: o.bytes.length, createdBy: o.actorId,
      });
      await audit(tx, { actorId: o.actorId, unitId: o.unitId, entityType: 'parameter_set', entityId: o.parameterSetId, action: 'compensation.created', details: { compensationId: id, targets: o.targetCount, frame: o.frame, inputSha256: digest } });
    });
  } catch (e) {
    await deleteObject(key).catch(() => {});
    throw e;
  }
  return id;
}

async function queue(): Promise<PgBoss> {
  const boss = await jobQueue();
  await ensureQueue(boss, { name: COMPENSATE_QUEUE, policy: 'stately', retryLimit: 3, retryDelay: 2, expireInSeconds: 15 * 60 });
  return boss;
}

const localWorkers: string[] = [];

export async function enqueueCompensation(id: string): Promise<void> {
  const boss = await queue();
  await boss.send(COMPENSATE_QUEUE, { id }, { singletonKey: id });
  for (const w of localWorkers) boss.notifyWorker(w);
}

/** Summary for the page: counts, histogram, the largest corrections and the targets not reached. */
export function summarise(result: CompensationResult): CompensationSummary {
  const good = result.targets.filter((t) => t.status !== 'unreachable' && t.status !== 'outside-limits');
  // Bins over the range the corrections span (a calibration moves most targets by similar amounts).
  const lo = good.reduce((m, t) => Math.min(m, t.correction), good.length ? Infinity : 0);
  const hi = Math.max(result.maxCorrection, lo + 1e-6);
  const width = (hi - lo) / HISTOGRAM_BINS;
  const counts = new Array(HISTOGRAM_BINS).fill(0);
  for (const t of good) counts[Math.min(HISTOGRAM_BINS - 1, Math.max(0, Math.floor((t.correction - lo) / width)))]++;
  const edges = Array.from({ length: HISTOGRAM_BINS + 1 }, (_, k) => lo + k * width);
  const largest = [...good].sort((a, b) => b.correction - a.correction).slice(0, LIST_CAP)
    .map((t) => ({ target: t.target, line: t.line, correctionMm: t.correction, rotationDeg: t.rotationCorrection, status: t.status }));
  const notReached = result.targets.filter((t) => t.status !== 'reached').slice(0, LIST_CAP)
    .map((t) => ({ target: t.target, line: t.line, status: t.status, message: t.message }));
  const points = decimatePoses(
    good.map((t) => ({ label: t.target, role: 'target' as const, p: [t.x - t.correctionVector[0], t.y - t.correctionVector[1], t.z - t.correctionVector[2]] as [number, number, number], e: t.correctionVector, q: t.q })),
  ) as NonNullable<CompensationSummary['points']>;
  return { kind: result.kind, counts: result.counts, maxCorrectionMm: result.maxCorrection, rmsCorrectionMm: result.rmsCorrection, histogram: { edges, counts }, largest, notReached, milliseconds: result.milliseconds, points };
}

/**
 * The 3-D view of a compensated program: the nominal arm (robot base frame, the program's tool) drawn at the
 * calibrated joint values, which is where it lands on the compensated target, each original target with its
 * correction vector. Undefined until the program is done.
 */
export async function compensationScene(id: string, database: Db = sharedDb()): Promise<View3DProps | undefined> {
  const [r] = await database
    .select({ points: sql<CompensationSummary['points'] | null>`${compensations.summary}->'points'`, tool: compensations.tool, nominal: armModelRevisions.geometry, total: compensations.targetCount })
    .from(compensations)
    .innerJoin(armModelRevisions, eq(armModelRevisions.id, compensations.nominalRevisionId))
    .where(eq(compensations.id, id));
  if (!r?.points?.length) return undefined;
  const nominal = r.nominal as ArmGeometry;
  return {
    geometry: { ...nominal, base: undefined, tool: (r.tool as FrameSpec | null) ?? nominal.tool },
    poses: r.points,
    total: r.total,
    errorMeaning: 'compensated − original target (robot base frame); the arm is the nominal model at the calibrated joint values',
    title: 'The program in 3-D',
    frameName: 'Robot base frame',
  };
}

/** Run one compensation (exactly-once effect: claimed queued|running → running; written only while running). */
export async function runCompensation(id: string, database: Db = sharedDb()): Promise<'done' | 'failed' | 'skipped'> {
  const [c] = await database
    .update(compensations)
    .set({ state: 'running', attempts: sql`${compensations.attempts} + 1`, error: null })
    .where(and(eq(compensations.id, id), inArray(compensations.state, ['queued', 'running'])))
    .returning();
  if (!c) return 'skipped';
  const [set] = await database.select({ geometry: parameterSets.geometry }).from(parameterSets).where(eq(parameterSets.id, c.parameterSetId));
  const [rev] = await database.select({ geometry: armModelRevisions.geometry }).from(armModelRevisions).where(eq(armModelRevisions.id, c.nominalRevisionId));
  const fail = async (message: string) => {
    await database.transaction(async (tx) => {
      const rows = await tx.update(compensations).set({ state: 'failed', error: message, finishedAt: sql`now()` }).where(and(eq(compensations.id, id), eq(compensations.state, 'running'))).returning({ id: compensations.id });
      if (rows.length) await audit(tx, { actorId: null, unitId: c.unitId, entityType: 'parameter_set', entityId: c.parameterSetId, action: 'compensation.failed', comment: message, details: { compensationId: id } });
    });
    return 'failed' as const;
  };
  const stored = await getObjectBytes(c.inputKey);
  if (sha256(stored) !== c.inputSha256) return fail('The stored program does not match its checksum.');
  const input = new TextDecoder().decode(stored);
  const calibrated = set.geometry as ArmGeometry, nominal = rev.geometry as ArmGeometry;
  const parsed = parseProgramCsv(input, c.inputName, calibrated.joints.length);
  if (!parsed.ok) return fail(`The program cannot be read: ${parsed.problems.slice(0, 5).map(formatProblem).join('; ')}.`);
  let lastWrite = 0;
  let result: CompensationResult;
  try {
    result = await compensateProgramAsync(calibrated, nominal, parsed, {
      frame: c.frame, tool: c.tool ?? undefined, progressEvery: 250,
      onProgress: (done, total) => {
        const now = Date.now();
        if (now - lastWrite < 300) return;
        lastWrite = now;
        void database.update(compensations).set({ progress: { done, total } }).where(and(eq(compensations.id, id), eq(compensations.state, 'running'))).catch(() => {});
      },
    });
  } catch (e) {
    if (e instanceof EngineInputError) return fail(`The program cannot be compensated: ${e.problems.map(formatProblem).join('; ')}.`);
    throw e;
  }
  const out = Buffer.from(compensatedCsv(result.targets, calibrated.joints.length), 'utf8');
  const outKey = `compensations/${c.unitId}/${id}/output-${c.attempts}.csv`;
  const outSha = sha256(out);
  await putObject(outKey, out, 'text/csv; charset=utf-8', { sha256: outSha });
  try {
    const ok = await database.transaction(async (tx) => {
      const rows = await tx
        .update(compensations)
        .set({ state: 'done', outputKey: outKey, outputSha256: outSha, outputBytes: out.length, summary: summarise(result), progress: { done: result.targets.length, total: result.targets.length }, finishedAt: sql`now()` })
        .where(and(eq(compensations.id, id), eq(compensations.state, 'running')))
        .returning({ id: compensations.id });
      if (!rows.length) return false;
      await audit(tx, { actorId: null, unitId: c.unitId, entityType: 'parameter_set', entityId: c.parameterSetId, action: 'compensation.completed', details: { compensationId: id, counts: result.counts, outputSha256: outSha } });
      return true;
    });
    if (!ok) {
      await deleteObject(outKey).catch(() => {});
      return 'skipped';
    }
  } catch (e) {
    await deleteObject(outKey).catch(() => {});
    throw e;
  }
  return 'done';
}

let starting: Promise<void> | undefined;

/** Start the compensation worker in this process (idempotent; retried every 5 s while PostgreSQL is away). */
export function startCompensationWorker(): Promise<void> {
  starting ??= startWhenReady('compensation worker', async () => {
    const boss = await queue();
    localWorkers.push(
      await boss.work<{ id: string }>(COMPENSATE_QUEUE, { batchSize: 1, pollingIntervalSeconds: 1 }, async ([job]) => {
        const id = job?.data?.id;
        if (!id || !z.uuid().safeParse(id).success) return;
        const outcome = await runCompensation(id);
        log('info', 'compensation job', { id, outcome });
      }),
    );
    // Programs whose enqueue was lost (e.g. the queue was away at upload) are queued again.
    const timer = setInterval(() => void requeueWaiting().catch(() => {}), 15_000);
    timer.unref();
  });
  return starting;
}

async function requeueWaiting(database: Db = sharedDb()) {
  const waiting = await database.select({ id: compensations.id }).from(compensations)
    .where(and(eq(compensations.state, 'queued'), sql`${compensations.createdAt} < now() - interval '10 seconds'`)).limit(100);
  for (const w of waiting) await enqueueCompensation(w.id);
}

const view = (r: typeof compensations.$inferSelect & { serial: string; version: number; userName: string }) => ({
  id: r.id, serial: r.serial, parameterSetId: r.parameterSetId, parameterSetVersion: r.version, state: r.state, frame: r.frame, tool: r.tool,
  targetCount: r.targetCount, input: { name: r.inputName, sha256: r.inputSha256, bytes: r.inputBytes },
  output: r.outputKey ? { sha256: r.outputSha256!, bytes: r.outputBytes! } : null,
  progress: r.progress, error: r.error, createdBy: r.userName, createdAt: r.createdAt.toISOString(), finishedAt: r.finishedAt ? r.finishedAt.toISOString() : null,
});
export type CompensationView = ReturnType<typeof view> & { summary?: CompensationSummary | null };

const base = (database: Db) =>
  database
    .select({ c: compensations, serial: units.serial, version: parameterSets.version, userName: users.name })
    .from(compensations)
    .innerJoin(units, eq(units.id, compensations.unitId))
    .innerJoin(parameterSets, eq(parameterSets.id, compensations.parameterSetId))
    .innerJoin(users, eq(users.id, compensations.createdBy));

export async function getCompensation(id: string, database: Db = sharedDb()): Promise<CompensationView | undefined> {
  const [r] = await base(database).where(eq(compensations.id, id));
  if (!r) return undefined;
  // The 3-D view's points are served by compensationScene, not with the summary.
  const { points: _points, ...summary } = r.c.summary ?? ({} as CompensationSummary);
  return { ...view({ ...r.c, serial: r.serial, version: r.version, userName: r.userName }), summary: r.c.summary ? summary : null };
}

/** Compensations of a unit (or of every unit), newest first, without their summaries. */
export async function listCompensations(serial: string | undefined, limit = 50, database: Db = sharedDb()): Promise<CompensationView[]> {
  const q = base(database);
  const rows = await (serial ? q.where(eq(units.serial, serial)) : q).orderBy(desc(compensations.createdAt)).limit(limit);
  return rows.map((r) => view({ ...r.c, serial: r.serial, version: r.version, userName: r.userName }));
}

/** The stored input or output file; the output's download is written to the export log. */
export async function compensationFile(id: string, part: 'input' | 'output', actorId: string, database: Db = sharedDb()) {
  const [r] = await base(database).where(eq(compensations.id, id));
  if (!r) return { status: 404 as const };
  const key = part === 'input' ? r.c.inputKey : r.c.outputKey;
  if (!key) return { status: 409 as const };
  const bytes = await getObjectBytes(key);
  const stem = r.c.inputName.replace(/\.csv$/i, '');
  if (part === 'output') {
    await database.insert(exportLog).values({ userId: actorId, kind: 'compensation', format: 'compensated-program-csv', items: [{ serial: r.serial, version: r.version, parameterSetId: r.c.parameterSetId }] });
  }
  return { status: 200 as const, bytes, sha256: part === 'input' ? r.c.inputSha256 : r.c.outputSha256!, fileName: part === 'input' ? r.c.inputName : `${stem}-compensated-${r.serial}-v${r.version}.csv` };
}
