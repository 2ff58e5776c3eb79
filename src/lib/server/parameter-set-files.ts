/**
 * The files of an approved parameter set, as every export and the certificate build them: the set read
 * with the facts frozen at approval, the arm geometry JSON, the flat parameter CSV, the URDF, the unit's
 * manifest, the certificate number, and the export_log entry that records who took them.
 *
 * Reproducible: the files of an approved set are built only from the set's own immutable row — its geometry,
 * standard errors, approval time and the facts frozen at approval (serial, model name and revision,
 * approver; see FrozenFacts) — and the nominal revision (revisions are never edited). Renaming the model,
 * the unit or the approver later does not change a byte.
 */
import { and, eq, inArray } from 'drizzle-orm';
import { armModelRevisions, armModels, exportLog, fits, parameterSets, sessions, units, users } from '../../db/schema';
import { serializeGeometry } from '../engine/geometry';
import { csvText, type CsvCell } from '../shared/csv';
import { SAFETY_CAUTION } from '../shared/safety';
import { db as sharedDb, type Db } from './db';
import { mergedOrder, parameterValues } from './parameter-values';
import { sha256 } from './tokens';
import { geometryToUrdf, type UrdfRoot } from './urdf';

/** The certificate's file name inside a batch folder and in the unit manifest. */
export const CERTIFICATE_FILE = 'certificate.pdf';

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
export async function loadSets(where: { setIds?: string[]; unitIds?: string[] }, database: Db) {
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

export interface BuiltFile {
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

export async function logExport(database: Db, actor: ExportActor, kind: 'single' | 'batch', format: string, sets: Pick<SetRow, 'serial' | 'version' | 'setId'>[]) {
  await database.insert(exportLog).values({
    userId: actor.id,
    kind,
    format,
    items: sets.map((s) => ({ serial: s.serial, version: s.version, parameterSetId: s.setId })),
  });
}
