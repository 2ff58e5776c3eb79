/**
 * Export bundles of approved parameter sets for a controller: the arm geometry JSON, a flat CSV of the
 * parameters, a URDF and a manifest with the SHA-256 of each file (structure: README, "Export files").
 * One set as a single file, or a batch as a zip with one folder per unit (plus its calibration
 * certificate), a top-level manifest and a SHA256SUMS file that `sha256sum -c` verifies.
 * Every export is written to export_log (who, kind, format, serial + version + set id of each item).
 */
import { and, asc, count, desc, eq, inArray } from 'drizzle-orm';
import JSZip from 'jszip';
import { z } from 'zod';
import { armModelRevisions, armModels, exportLog, parameterSets, units, users } from '../../db/schema';
import { SAFETY_CAUTION } from '../shared/safety';
import { renderCertificateFor } from './certificate';
import { db as sharedDb, type Db } from './db';
import { buildFiles, CERTIFICATE_FILE, loadSets, logExport, MEDIA_TYPES, unitManifest, type ExportActor, type ExportFormat, type SetRow } from './parameter-set-files';
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
