/**
 * Export bundles of approved parameter sets for a controller: the arm geometry JSON, a flat CSV of the
 * parameters, a URDF and a manifest with the SHA-256 of each file (structure: README, "Export files").
 * One set as a single file, or a batch as a zip with one folder per unit (plus its calibration
 * certificate), a top-level manifest and a SHA256SUMS file that `sha256sum -c` verifies.
 * Every export is written to export_log (who, kind, format, serial + version + set id of each item).
 *
 * Reproducible: the files of an approved set are built only from the set's own immutable row — its geometry,
 * standard errors, approval time and the facts frozen at approval (serial, model name and revision,
 * approver; see FrozenFacts) — and the nominal revision (revisions are never edited). Renaming the model,
 * the unit or the approver later does not change a byte.
 */
import { and, asc, count, desc, eq, inArray } from 'drizzle-orm';
import JSZip from 'jszip';
import { z } from 'zod';
import { armModelRevisions, armModels, exportLog, fits, parameterSets, sessions, units, users } from '../../db/schema';
import { serializeGeometry } from '../engine/geometry';
import { csvText, type CsvCell } from '../shared/csv';
import { SAFETY_CAUTION } from '../shared/safety';
import { db as sharedDb, type Db } from './db';
import { mergedOrder, parameterValues } from './parameter-values';
import { sha256 } from './tokens';
import { CERTIFICATE_FILE, renderCertificateFor } from './certificate';
import { geometryToUrdf, type UrdfRoot } from './urdf';

export const EXPORT_FORMATS = ['json', 'csv', 'urdf'] as const;
export type ExportFormat = (typeof EXPORT_FORMATS)[number];

export const FILE_NAMES: Record<ExportFormat, string> = { json: 'geometry.json', csv: 'parameters.csv', urdf: 'robot.urdf' };
export const MEDIA_TYPES: Record<ExportFormat | 'manifest', string> = {
  json: 'application/json',
  csv: 'text/csv',
  urdf: 'application/xml',
  manifest: 'application/json',
};

export interface ExportActor {
  id: string;
  name: string;
  email: string;
}

/** Everything a bundle needs about one set. */
async function loadSets(where: { setIds?: string[]; unitIds?: string[] }, database: Db) {
  const cond = where.setIds ? inArray(parameterSets.id, where.setIds) : and(inArray(parameterSets.unitId, where.unitIds!), eq(parameterSets.state, 'current'));
  return database
    .select({
      setId: parameterSets.id,
      version: parameterSets.version,
      state: parameterSets.state,
      geometry: parameterSets.geometry,
      standardErrors: parameterSets.standardErrors,
      approvedAt: parameterSets.approvedAt,
      approvedById: parameterSets.approvedBy,
      comment: parameterSets.comment,
      frozen: parameterSets.frozen,
      certificateNo: parameterSets.certificateNo,
      unitId: units.id,
      /** The unit's serial today (for finding it); the files use the serial frozen at approval. */
      currentSerial: units.serial,
      nominal: armModelRevisions.geometry,
      engineVersion: fits.engineVersion,
      fitId: fits.id,
    })
    .from(parameterSets)
    .innerJoin(units, eq(units.id, parameterSets.unitId))
    .innerJoin(fits, eq(fits.id, parameterSets.fitId))
    .innerJoin(sessions, eq(sessions.id, fits.sessionId))
    // The nominal of a set is the revision its fit was made against (revisions are never edited).
    .innerJoin(armModelRevisions, eq(armModelRevisions.id, sessions.modelRevisionId))
    .where(cond)
    .then((rows) =>
      rows.map(({ frozen, ...r }) => {
        if (!frozen) throw new Error(`parameter set ${r.setId} has no facts frozen at approval (migration missing?)`);
        return {
          ...r,
          frozen,
          serial: frozen.serial,
          modelId: frozen.modelId,
          modelName: frozen.modelName,
          revision: frozen.revision,
          approverName: frozen.approverName,
          approverEmail: frozen.approverEmail,
        };
      }),
    );
}
export type SetRow = Awaited<ReturnType<typeof loadSets>>[number];

/** One approved set with what its files need; undefined when there is no such set. */
export async function loadSet(setId: string, database: Db = sharedDb()): Promise<SetRow | undefined> {
  const [s] = await loadSets({ setIds: [setId] }, database);
  return s;
}

/** The sign convention every export file states. */
export const CHANGE_CONVENTION = 'change = calibrated − nominal';

/** The metadata block of an exported geometry JSON (Offsetry's geometry reader accepts and ignores it). */
export function geometryMetadata(s: SetRow) {
  return {
    generator: 'Offsetry',
    serial: s.serial,
    parameterSet: { id: s.setId, version: s.version, approvedAt: new Date(s.approvedAt).toISOString(), approvedBy: s.approverName },
    armModel: { id: s.modelId, name: s.modelName, revision: s.revision },
    certificate: certificateNumber(s),
    units: { length: 'mm', angle: 'deg' },
    frames: 'joint rows: the convention named in "convention"; base: robot base in the tracker (measurement) frame of the session; tool: target point in the flange frame; frames are Txyz·Rz(rz)·Ry(ry)·Rx(rx)',
    signConvention: CHANGE_CONVENTION,
  };
}

/** The certificate number: a running number given by the database at approval, with the approval year. */
export function certificateNumber(s: { certificateNo: number; approvedAt: Date | string }): string {
  return `OC-${new Date(s.approvedAt).getUTCFullYear()}-${String(s.certificateNo).padStart(6, '0')}`;
}

/**
 * key, joint, group, unit, nominal, calibrated, change_calibrated_minus_nominal, standard_error — one row per
 * parameter; the unit column names each row's unit (mm or deg), the change column's name states its sign.
 */
export function parametersCsv(nominal: SetRow['nominal'], calibrated: SetRow['geometry'], standardErrors: Record<string, number | null>): string {
  const nom = new Map(parameterValues(nominal).map((p) => [p.key, p.value]));
  const cal = new Map(parameterValues(calibrated).map((p) => [p.key, p]));
  const rows: CsvCell[][] = [['key', 'joint', 'group', 'unit', 'nominal', 'calibrated', 'change_calibrated_minus_nominal', 'standard_error']];
  for (const p of mergedOrder([parameterValues(calibrated)])) {
    const c = cal.get(p.key)!.value;
    const n = nom.get(p.key);
    rows.push([p.key, p.joint ?? '', p.group, p.unit, n, c, n === undefined ? null : c - n, standardErrors[p.key]]);
  }
  return csvText(rows);
}

interface BuiltFile {
  name: string;
  format: ExportFormat;
  text: string;
  bytes: Uint8Array;
  sha256: string;
}

export function buildFiles(s: SetRow, urdfRoot: UrdfRoot = 'base'): BuiltFile[] {
  const texts: Record<ExportFormat, string> = {
    json: serializeGeometry(s.geometry, geometryMetadata(s)),
    csv: parametersCsv(s.nominal, s.geometry, s.standardErrors),
    urdf: geometryToUrdf(s.geometry, {
      robotName: `${s.modelName} ${s.serial}`,
      root: urdfRoot,
      comment: [
        `Offsetry export: unit ${s.serial}, parameter set v${s.version} (${s.setId}),`,
        `arm model ${s.modelName} r${s.revision}, approved by ${s.approverName} at ${new Date(s.approvedAt).toISOString()}.`,
        urdfRoot === 'base'
          ? 'Rooted at the robot base (link "base"). The tracker frame of the calibration session is not included (export with frame=tracker to add it).'
          : 'Rooted at the tracker (measurement) frame of the calibration session (link "measurement"); the robot base is the link "base".',
        'Lengths in metres, angles in radians. Geometry only: effort and velocity limits are 0 placeholders.',
        SAFETY_CAUTION,
      ],
    }),
  };
  return EXPORT_FORMATS.map((format) => {
    const bytes = new TextEncoder().encode(texts[format]);
    return { name: FILE_NAMES[format], format, text: texts[format], bytes, sha256: sha256(bytes) };
  });
}

export function unitManifest(s: SetRow, files: BuiltFile[], exportedAt: string, certificate?: { bytes: number; sha256: string }) {
  return {
    format: 'offsetry-export/1',
    serial: s.serial,
    version: s.version,
    parameterSetId: s.setId,
    state: s.state,
    approvedBy: { name: s.approverName, email: s.approverEmail },
    approvedAt: new Date(s.approvedAt).toISOString(),
    armModel: { id: s.modelId, name: s.modelName, revision: s.revision },
    fitId: s.fitId,
    engineVersion: s.engineVersion,
    exportedAt,
    files: [
      ...files.map((f) => ({ name: f.name, mediaType: MEDIA_TYPES[f.format], bytes: f.bytes.length, sha256: f.sha256 })),
      ...(certificate ? [{ name: CERTIFICATE_FILE, mediaType: 'application/pdf', ...certificate }] : []),
    ],
    certificate: certificateNumber(s),
    safety: SAFETY_CAUTION,
  };
}

export async function logExport(database: Db, actor: ExportActor, kind: 'single' | 'batch', format: string, sets: SetRow[]) {
  await database.insert(exportLog).values({
    userId: actor.id,
    kind,
    format,
    items: sets.map((s) => ({ serial: s.serial, version: s.version, parameterSetId: s.setId })),
  });
}

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

export const batchSchema = z.strictObject({
  serials: z
    .array(z.string({ error: 'each serial number must be text' }).trim().min(1, 'a serial number must not be empty'), { error: 'serials must be a list of serial numbers' })
    .min(1, 'serials must list at least one serial number')
    .max(500, 'at most 500 units per batch'),
});

export type BatchResult =
  | { ok: true; zip: Uint8Array; fileName: string; manifest: ReturnType<typeof batchManifest> }
  | { ok: false; unknown: string[]; withoutSet: string[] };

function batchManifest(actor: ExportActor, exportedAt: string, entries: { s: SetRow; files: { path: string; bytes: number; sha256: string }[] }[]) {
  return {
    format: 'offsetry-export-batch/1',
    exportedAt,
    exportedBy: { name: actor.name, email: actor.email },
    units: entries.map(({ s, files }) => ({ serial: s.currentSerial, version: s.version, parameterSetId: s.setId, folder: `${s.currentSerial}/`, files })),
    safety: SAFETY_CAUTION,
  };
}

/**
 * Each unit's CURRENT set as a zip: <serial>/geometry.json, parameters.csv, robot.urdf, certificate.pdf,
 * manifest.json, plus
 * the top-level manifest.json and SHA256SUMS (every other file, in the format `sha256sum -c` reads: hex
 * digest, two spaces, path relative to the zip's root).
 */
export async function exportBatch(serials: string[], actor: ExportActor, database: Db = sharedDb()): Promise<BatchResult> {
  const wanted = [...new Set(serials)];
  const found = await database.select({ id: units.id, serial: units.serial }).from(units).where(inArray(units.serial, wanted));
  const known = new Map(found.map((u) => [u.serial, u.id]));
  const unknown = wanted.filter((s) => !known.has(s));
  const sets = found.length ? await loadSets({ unitIds: found.map((u) => u.id) }, database) : [];
  const withSet = new Set(sets.map((s) => s.currentSerial));
  const withoutSet = wanted.filter((s) => known.has(s) && !withSet.has(s));
  if (unknown.length || withoutSet.length) return { ok: false, unknown, withoutSet };
  const exportedAt = new Date().toISOString();
  const date = new Date(exportedAt);
  const zip = new JSZip();
  const entries: { s: SetRow; files: { path: string; bytes: number; sha256: string }[] }[] = [];
  const ordered = wanted.map((serial) => sets.find((s) => s.currentSerial === serial)!);
  const sums: string[] = [];
  const add = (path: string, bytes: Uint8Array) => {
    zip.file(path, bytes, { date });
    const digest = sha256(bytes);
    sums.push(`${digest}  ${path}`);
    return { path, bytes: bytes.length, sha256: digest };
  };
  for (const s of ordered) {
    const folder = s.currentSerial;
    const files = buildFiles(s);
    const listed = files.map((f) => add(`${folder}/${f.name}`, f.bytes));
    const certificate = add(`${folder}/${CERTIFICATE_FILE}`, await renderCertificateFor(s, database));
    listed.push(certificate);
    const manifestBytes = new TextEncoder().encode(JSON.stringify(unitManifest(s, files, exportedAt, certificate), null, 2) + '\n');
    listed.push(add(`${folder}/manifest.json`, manifestBytes));
    entries.push({ s, files: listed });
  }
  const manifest = batchManifest(actor, exportedAt, entries);
  add('manifest.json', new TextEncoder().encode(JSON.stringify(manifest, null, 2) + '\n'));
  zip.file('SHA256SUMS', sums.join('\n') + '\n', { date });
  const bytes = await zip.generateAsync({ type: 'uint8array', compression: 'DEFLATE', compressionOptions: { level: 6 } });
  await logExport(database, actor, 'batch', 'zip', ordered);
  return { ok: true, zip: bytes, fileName: `offsetry-export-${exportedAt.slice(0, 19).replace(/[:T]/g, '-')}.zip`, manifest };
}

export const logQuerySchema = z.strictObject({
  page: z.coerce.number({ error: 'page must be a whole number from 1' }).int('page must be a whole number from 1').min(1, 'page must be a whole number from 1').default(1),
  pageSize: z.coerce.number({ error: 'pageSize must be a whole number' }).int('pageSize must be a whole number').min(1, 'pageSize must be 1 to 200').max(200, 'pageSize must be 1 to 200').default(25),
});

/** The export log, newest first, paginated. */
export async function exportLogPage(page = 1, pageSize = 25, database: Db = sharedDb()) {
  const [{ total }] = (await database.select({ total: count() }).from(exportLog)) as [{ total: number }];
  const rows = await database
    .select({ id: exportLog.id, at: exportLog.at, kind: exportLog.kind, format: exportLog.format, items: exportLog.items, userName: users.name, userEmail: users.email })
    .from(exportLog)
    .innerJoin(users, eq(users.id, exportLog.userId))
    .orderBy(desc(exportLog.at), desc(exportLog.id))
    .limit(pageSize)
    .offset((page - 1) * pageSize);
  return { page, pageSize, total, entries: rows.map((r) => ({ ...r, at: new Date(r.at).toISOString() })) };
}

/** Units with a current set, for the export picker. */
export async function exportableUnits(database: Db = sharedDb()) {
  const rows = await database
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
    .where(eq(parameterSets.state, 'current'))
    .orderBy(asc(units.serial));
  return rows.map((r) => ({ ...r, approvedAt: new Date(r.approvedAt).toISOString() }));
}
