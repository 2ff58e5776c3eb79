/**
 * Export bundles of approved parameter sets for a controller: the arm geometry JSON, a flat CSV of the
 * parameters, a URDF and a manifest with the SHA-256 of each file (structure: README, "Export files").
 * One set as a single file, or a batch as a zip (streamed) with one folder per unit (plus its calibration
 * certificate), a top-level manifest and a SHA256SUMS file that `sha256sum -c` verifies.
 * Every export is written to export_log (who, kind, format, serial + version + set id of each item).
 */
import { createHash } from 'node:crypto';
import { createReadStream } from 'node:fs';
import { mkdtemp, open, rm, type FileHandle } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Readable } from 'node:stream';
import { and, asc, count, desc, eq, inArray, sql } from 'drizzle-orm';
import archiver, { type Archiver } from 'archiver';
import { z } from 'zod';
import { armModelRevisions, armModels, exportLog, parameterSets, units, users } from '../../db/schema';
import { EXPORT_PICKER_PAGE, type ExportableSerials, type ExportableUnitsPage } from '../shared/export-view';
import { SAFETY_CAUTION } from '../shared/safety';
import { unitSearchCondition } from './units';
import { renderCertificateFor } from './certificate';
import { db as sharedDb, type Db } from './db';
import { buildFiles, CERTIFICATE_FILE, loadSets, logExport, MEDIA_TYPES, unitManifest, type ExportActor, type ExportFormat, type SetRow } from './parameter-set-files';
import { log } from './log';
import { sha256 } from './tokens';
import type { UrdfRoot } from './urdf';

/** One file of one set, logged. Undefined when the set does not exist. */
export async function exportSingle(setId: string, format: ExportFormat, actor: ExportActor, database: Db = sharedDb(), urdfRoot: UrdfRoot = 'base') {
  const [s] = await loadSets({ setIds: [setId] }, database);
  if (!s) return undefined;
  const file = buildFiles(s, urdfRoot).find((f) => f.format === format)!;
  await logExport(database, actor, 'single', format, [s]);
  return {
    fileName: `${s.serial}-v${s.version}-${format === 'urdf' && urdfRoot === 'tracker' ? 'robot-tracker-frame.urdf' : file.name}`,
    mediaType: MEDIA_TYPES[format],
    bytes: file.bytes,
    sha256: file.sha256,
  };
}

/** Most units in one batch export (the zip is streamed, so the size is bounded by time, not memory). */
export const BATCH_LIMIT = 10_000;

export const batchSchema = z.strictObject({
  serials: z
    .array(z.string({ error: 'each serial number must be text' }).trim().min(1, 'a serial number must not be empty'), { error: 'serials must be a list of serial numbers' })
    .min(1, 'serials must list at least one serial number')
    .max(BATCH_LIMIT, `at most ${BATCH_LIMIT} units per batch`),
  /** Leave the certificates out (controller files only; drawing a certificate takes ~0.1 s of CPU per unit). */
  certificates: z.boolean({ error: 'certificates must be true or false' }).default(true),
});

export type BatchResult =
  | { ok: true; stream: ReadableStream<Uint8Array>; fileName: string; done: Promise<void> }
  | { ok: false; unknown: string[]; withoutSet: string[] };

type ManifestEntry = { serial: string; version: number; parameterSetId: string; folder: string; files: { path: string; bytes: number; sha256: string }[] };

/** Units whose sets are read from the database at a time while the zip is written. */
const READ_BATCH = 100;

/**
 * Each unit's CURRENT set as a zip: <serial>/geometry.json, parameters.csv, robot.urdf, certificate.pdf,
 * manifest.json, plus the top-level manifest.json and SHA256SUMS (every other file, in the format
 * `sha256sum -c` reads: hex digest, two spaces, path relative to the zip's root).
 *
 * The zip is written while it is sent (archiver): sets are read READ_BATCH units at a time, each file is
 * handed to the zip and the next unit waits until the zip has taken the previous one and the client has
 * read all but HIGH_WATER bytes of the output (archiver itself does not wait for the reader). The top-level
 * manifest.json and SHA256SUMS list every unit: each unit's part of them goes to a temporary file as the unit
 * is written (ManifestSpill) and both are streamed from there at the end, so neither the files nor those lists
 * stay in memory. What does is archiver's record of each entry, kept for the central directory the zip format
 * puts last, and the batch's list of units (tests/integration/export-stream.test.ts measures both).
 * The export is logged when every unit's files are written, before the zip's last entries.
 */
export async function exportBatch(serials: string[], actor: ExportActor, database: Db = sharedDb(), options: { certificates?: boolean } = {}): Promise<BatchResult> {
  const wanted = [...new Set(serials)];
  const found = await database
    .select({ id: units.id, serial: units.serial, setId: parameterSets.id })
    .from(units)
    .leftJoin(parameterSets, and(eq(parameterSets.unitId, units.id), eq(parameterSets.state, 'current')))
    .where(inArray(units.serial, wanted));
  const known = new Map(found.map((u) => [u.serial, u]));
  const unknown = wanted.filter((s) => !known.has(s));
  const withoutSet = wanted.filter((s) => known.has(s) && !known.get(s)!.setId);
  if (unknown.length || withoutSet.length) return { ok: false, unknown, withoutSet };
  const exportedAt = new Date().toISOString();
  const archive = archiver('zip', { zlib: { level: 6 } });
  const unitIds = wanted.map((s) => known.get(s)!.id);
  const done = writeBatch(archive, unitIds, actor, exportedAt, database, options.certificates ?? true).catch((err) => {
    log('warn', 'batch export stopped', { units: unitIds.length, error: String((err as Error)?.message ?? err) });
    archive.destroy(err as Error);
  });
  return { ok: true, stream: webStream(archive), fileName: `offsetry-export-${exportedAt.slice(0, 19).replace(/[:T]/g, '-')}.zip`, done };
}

/** Bytes the zip may hold between the files handed to it and the client's reads before the next unit waits. */
const HIGH_WATER = 256 * 1024;
const wakers = new WeakMap<Archiver, () => void>();
/** Archives writing their central directory: their output is taken as it comes (see webStream). */
const writingDirectory = new WeakSet<Archiver>();

/** The zip's output is handed on in blocks of about this size (see webStream). */
const BLOCK = 64 * 1024;

/**
 * The zip as a web stream that pauses the zip while the client has 256 KiB unread (counted in bytes, not
 * chunks). archiver emits its output in many small chunks (about 36 bytes on average: headers, descriptors,
 * deflate flushes), each a view into a larger buffer it was cut from; queued as they are, a few thousand of
 * them kept a few thousand of those buffers alive (found with a heap snapshot: the growth sat in the stream's
 * queue). They are copied together into blocks of BLOCK bytes instead, so what waits for the client is the
 * bytes themselves.
 */
function webStream(archive: Archiver): ReadableStream<Uint8Array> {
  const wake = () => wakers.get(archive)?.();
  let pending: Buffer[] = [];
  let pendingBytes = 0;
  return new ReadableStream<Uint8Array>(
    {
      start(controller) {
        const flush = () => {
          if (!pendingBytes) return;
          const block = Buffer.concat(pending, pendingBytes);
          pending = [];
          pendingBytes = 0;
          controller.enqueue(new Uint8Array(block.buffer, block.byteOffset, block.byteLength));
        };
        archive.on('data', (chunk: Buffer) => {
          pending.push(chunk);
          pendingBytes += chunk.byteLength;
          if (pendingBytes >= BLOCK) flush();
          // The central directory is the exception: archiver writes it at once as about 17 tiny buffers per
          // entry, which a paused archive holds as they are (3.3 MB at 1 000 units, measured); taken as they
          // come, they wait as their bytes in blocks (about 80 bytes an entry).
          if ((controller.desiredSize ?? 0) <= 0 && !writingDirectory.has(archive)) archive.pause();
          wake();
        });
        archive.once('end', () => {
          flush();
          controller.close();
        });
        archive.once('error', (err) => controller.error(err));
      },
      pull() {
        archive.resume();
        wake();
      },
      cancel() {
        archive.destroy(new Error('the client stopped reading'));
      },
    },
    { highWaterMark: HIGH_WATER, size: (chunk) => chunk.byteLength },
  );
}

/**
 * What the zip holds that the client has not read: archiver's zip writer pushes its output without waiting
 * (its internal stream, `_module`), then archiver's own buffers.
 */
function unread(archive: Archiver): number {
  const inner = (archive as unknown as { _module?: { readableLength?: number } })._module?.readableLength ?? 0;
  return inner + archive.writableLength + archive.readableLength;
}

/**
 * The top-level manifest's unit entries and the SHA256SUMS lines, appended to two temporary files as the
 * units are written and read back as streams for the zip's last two entries. The manifest comes out exactly
 * as `JSON.stringify(manifest, null, 2)` would write it whole (tests/integration/export-stream.test.ts
 * compares them); its digest is computed while it is read, for the last SHA256SUMS line.
 */
class ManifestSpill {
  private constructor(
    private readonly dir: string,
    private readonly entries: FileHandle,
    private readonly sums: FileHandle,
  ) {}
  private count = 0;

  static async create() {
    const dir = await mkdtemp(join(tmpdir(), 'offsetry-export-'));
    try {
      return new ManifestSpill(dir, await open(join(dir, 'units.json'), 'w'), await open(join(dir, 'SHA256SUMS'), 'w'));
    } catch (e) {
      await rm(dir, { recursive: true, force: true });
      throw e;
    }
  }

  /** One unit: its manifest entry, indented as it stands inside the manifest's "units" list, and its digest lines. */
  async add(entry: ManifestEntry, sums: string[]) {
    const text = JSON.stringify(entry, null, 2).replace(/\n/g, '\n    ');
    await this.entries.write(this.count++ ? `,\n    ${text}` : text);
    await this.sums.write(sums.map((line) => `${line}\n`).join(''));
  }

  /**
   * manifest.json as a stream: `document` gives the manifest with its list of units (a placeholder here, the
   * spilled entries in the output); `digest` resolves once the stream has been read to its end.
   */
  async manifest(document: (units: unknown[]) => Record<string, unknown>): Promise<{ stream: Readable; digest: Promise<string> }> {
    await this.entries.close();
    const marker = '\u0000units\u0000';
    const [before, after] = (JSON.stringify(document([marker]), null, 2) + '\n').split(JSON.stringify(marker)) as [string, string];
    const path = join(this.dir, 'units.json');
    const hash = createHash('sha256');
    let settle!: (digest: string) => void;
    const digest = new Promise<string>((resolve) => (settle = resolve));
    async function* parts() {
      yield Buffer.from(before);
      yield* createReadStream(path) as AsyncIterable<Buffer>;
      yield Buffer.from(after);
    }
    const stream = Readable.from(
      (async function* () {
        for await (const chunk of parts()) {
          hash.update(chunk);
          yield chunk;
        }
        settle(hash.digest('hex'));
      })(),
      { objectMode: false },
    );
    return { stream, digest };
  }

  /** SHA256SUMS as a stream: every unit's lines, then the manifest's (read only after the manifest). */
  async sha256sums(manifestDigest: Promise<string>): Promise<Readable> {
    await this.sums.close();
    const path = join(this.dir, 'SHA256SUMS');
    return Readable.from(
      (async function* () {
        yield* createReadStream(path) as AsyncIterable<Buffer>;
        yield Buffer.from(`${await manifestDigest}  manifest.json\n`);
      })(),
      { objectMode: false },
    );
  }

  async dispose() {
    await Promise.allSettled([this.entries.close(), this.sums.close()]);
    await rm(this.dir, { recursive: true, force: true });
  }
}

async function writeBatch(archive: Archiver, unitIds: string[], actor: ExportActor, exportedAt: string, database: Db, withCertificates: boolean) {
  const spill = await ManifestSpill.create();
  try {
    await writeBatchInto(archive, spill, unitIds, actor, exportedAt, database, withCertificates);
  } finally {
    await spill.dispose();
  }
}

async function writeBatchInto(archive: Archiver, spill: ManifestSpill, unitIds: string[], actor: ExportActor, exportedAt: string, database: Db, withCertificates: boolean) {
  const date = new Date(exportedAt);
  let sums: string[] = [];
  const logged: { serial: string; version: number; setId: string }[] = [];
  let closed: Error | undefined;
  archive.on('error', (err) => (closed = err));
  archive.on('close', () => (closed ??= new Error('the client stopped reading')));
  let written = 0;
  let appended = 0;
  const waiters: (() => void)[] = [];
  const wakeAll = () => waiters.splice(0).forEach((w) => w());
  wakers.set(archive, wakeAll);
  archive.on('entry', (entry) => {
    written++;
    // SHA256SUMS is the last file: what follows is the central directory.
    if (entry.name === 'SHA256SUMS') {
      writingDirectory.add(archive);
      archive.resume();
    }
    wakeAll();
  });
  /** Resolves once the zip has taken every file handed to it and the client has read all but HIGH_WATER of it. */
  const drained = async () => {
    while (written < appended || unread(archive) > HIGH_WATER) {
      if (closed || archive.destroyed) throw closed ?? new Error('the zip was closed');
      await new Promise<void>((r) => {
        waiters.push(r);
        const t = setTimeout(r, 50);
        t.unref();
      });
    }
  };
  const add = (path: string, bytes: Uint8Array) => {
    if (closed || archive.destroyed) throw closed ?? new Error('the zip was closed');
    archive.append(Buffer.from(bytes.buffer, bytes.byteOffset, bytes.byteLength), { name: path, date });
    appended++;
    const digest = sha256(bytes);
    sums.push(`${digest}  ${path}`);
    return { path, bytes: bytes.length, sha256: digest };
  };
  for (let i = 0; i < unitIds.length; i += READ_BATCH) {
    const chunk = unitIds.slice(i, i + READ_BATCH);
    const byUnit = new Map((await loadSets({ unitIds: chunk }, database)).map((s) => [s.unitId, s]));
    const sets = chunk.map((id) => byUnit.get(id)).filter((s): s is SetRow => !!s);
    // Two certificates are drawn at a time (report worker threads) while the zip takes the previous unit.
    const draw = (s: SetRow | undefined) => (s && withCertificates ? renderCertificateFor(s, database) : undefined);
    let nextCertificate = draw(sets[0]);
    for (let k = 0; k < sets.length; k++) {
      const s = sets[k]!;
      const certificateBytes = await nextCertificate;
      nextCertificate = draw(sets[k + 1]);
      const folder = s.currentSerial;
      const files = buildFiles(s);
      const listed = files.map((f) => add(`${folder}/${f.name}`, f.bytes));
      const certificate = certificateBytes ? add(`${folder}/${CERTIFICATE_FILE}`, certificateBytes) : undefined;
      if (certificate) listed.push(certificate);
      const manifestBytes = new TextEncoder().encode(JSON.stringify(unitManifest(s, files, exportedAt, certificate), null, 2) + '\n');
      listed.push(add(`${folder}/manifest.json`, manifestBytes));
      await spill.add({ serial: s.currentSerial, version: s.version, parameterSetId: s.setId, folder: `${folder}/`, files: listed }, sums);
      sums = [];
      logged.push({ serial: s.serial, version: s.version, setId: s.setId });
      await drained();
    }
  }
  const manifest = await spill.manifest((units) => ({
    format: 'offsetry-export-batch/1',
    exportedAt,
    exportedBy: { name: actor.name, email: actor.email },
    units,
    safety: SAFETY_CAUTION,
  }));
  archive.append(manifest.stream, { name: 'manifest.json', date });
  await logExport(database, actor, 'batch', 'zip', logged);
  archive.append(await spill.sha256sums(manifest.digest), { name: 'SHA256SUMS', date });
  // Until the zip has read both streams (or stops): the spill files are removed after this.
  await Promise.race([archive.finalize(), new Promise<void>((_, reject) => archive.once('close', () => reject(closed ?? new Error('the zip was closed'))))]);
}

export const logQuerySchema = z.strictObject({
  page: z.coerce.number({ error: 'page must be a whole number from 1' }).int('page must be a whole number from 1').min(1, 'page must be a whole number from 1').default(1),
  pageSize: z.coerce.number({ error: 'pageSize must be a whole number' }).int('pageSize must be a whole number').min(1, 'pageSize must be 1 to 200').max(200, 'pageSize must be 1 to 200').default(25),
});

/** Items listed per log entry; a batch of thousands of units says how many and lists the first ones. */
export const LOG_ITEMS_SHOWN = 50;

/** The export log page's query, newest first through the (at, id) index (tests EXPLAIN it). */
export function exportLogQuery(page: number, pageSize: number, database: Db = sharedDb()) {
  return database
      .select({
        id: exportLog.id, at: exportLog.at, kind: exportLog.kind, format: exportLog.format,
        items: sql<{ serial: string; version: number; parameterSetId: string }[]>`jsonb_path_query_array(${exportLog.items}, ${`$[0 to ${LOG_ITEMS_SHOWN - 1}]`}::jsonpath)`,
        itemCount: sql<number>`jsonb_array_length(${exportLog.items})`.mapWith(Number),
        userName: users.name, userEmail: users.email,
      })
      .from(exportLog)
      .innerJoin(users, eq(users.id, exportLog.userId))
      .orderBy(desc(exportLog.at), desc(exportLog.id))
      .limit(pageSize)
      .offset((page - 1) * pageSize);
}

/** The export log, newest first, paginated. */
export async function exportLogPage(page = 1, pageSize = 25, database: Db = sharedDb()) {
  const [[counted], rows] = await Promise.all([database.select({ total: count() }).from(exportLog), exportLogQuery(page, pageSize, database)]);
  return { page, pageSize, total: counted?.total ?? 0, entries: rows.map((r) => ({ ...r, at: new Date(r.at).toISOString() })) };
}

export const exportableQuerySchema = z.strictObject({
  q: z.string().trim().max(100, 'q is at most 100 characters').default(''),
  page: z.coerce.number({ error: 'page must be a whole number from 1' }).int('page must be a whole number from 1').min(1, 'page must be a whole number from 1').default(1),
  pageSize: z.coerce.number({ error: 'pageSize must be a whole number' }).int('pageSize must be a whole number').min(1, 'pageSize must be 1 to 200').max(200, 'pageSize must be 1 to 200').default(EXPORT_PICKER_PAGE),
});
export type ExportableQuery = z.infer<typeof exportableQuerySchema>;

export const exportableSerialsQuerySchema = exportableQuerySchema.pick({ q: true });

/** Units with a current set whose serial, site, cell or arm model contains `q` (all when empty). */
async function exportableWhere(q: string, database: Db) {
  return and(eq(parameterSets.state, 'current'), q ? await unitSearchCondition(q, database) : undefined);
}

/** A page of the units with a current set, by serial number, for the export picker (the page and the API). */
export async function exportableUnitsPage(query: ExportableQuery, database: Db = sharedDb()): Promise<ExportableUnitsPage> {
  const where = await exportableWhere(query.q, database);
  const [rows, [counted]] = await Promise.all([
    database
      .select({
        serial: units.serial,
        site: units.site,
        needsAttention: units.needsAttention,
        modelName: armModels.name,
        setId: parameterSets.id,
        version: parameterSets.version,
        approvedAt: parameterSets.approvedAt,
      })
      .from(parameterSets)
      .innerJoin(units, eq(units.id, parameterSets.unitId))
      .innerJoin(armModelRevisions, eq(armModelRevisions.id, units.modelRevisionId))
      .innerJoin(armModels, eq(armModels.id, armModelRevisions.modelId))
      .where(where)
      .orderBy(asc(units.serial))
      .limit(query.pageSize)
      .offset((query.page - 1) * query.pageSize),
    // Counted up to one past PICKER_COUNT_LIMIT: past that the answer says "more than" (a search that matches
    // most of a large fleet would otherwise join every match for the count).
    database
      .select({ total: count() })
      .from(database.select({ one: sql`1` }).from(parameterSets).innerJoin(units, eq(units.id, parameterSets.unitId)).where(where).limit(PICKER_COUNT_LIMIT + 1).as('matches')),
  ]);
  const matched = counted?.total ?? 0;
  return {
    q: query.q,
    page: query.page,
    pageSize: query.pageSize,
    total: Math.min(matched, PICKER_COUNT_LIMIT),
    totalIsLowerBound: matched > PICKER_COUNT_LIMIT,
    items: rows.map((r) => ({ ...r, approvedAt: new Date(r.approvedAt).toISOString() })),
  };
}

/** The picker counts matches exactly up to this many. */
export const PICKER_COUNT_LIMIT = 1000;

/** The serial numbers of every unit a search matches, up to a batch's limit, for "pick all that match". */
export async function exportableSerials(q: string, database: Db = sharedDb()): Promise<ExportableSerials> {
  const where = await exportableWhere(q, database);
  const rows = await database
    .select({ serial: units.serial })
    .from(parameterSets)
    .innerJoin(units, eq(units.id, parameterSets.unitId))
    .where(where)
    .orderBy(asc(units.serial))
    .limit(BATCH_LIMIT + 1);
  return { q, limit: BATCH_LIMIT, more: rows.length > BATCH_LIMIT, serials: rows.slice(0, BATCH_LIMIT).map((r) => r.serial) };
}
