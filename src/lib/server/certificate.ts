/**
 * The calibration certificate of an approved parameter set: the data gathered here from the database (small
 * queries only), the PDF drawn on a worker thread (engine-runner.ts runReport → certificate-pdf.ts).
 *
 * Reproducible: everything the certificate states comes from the set's immutable row (geometry, standard
 * errors, approval time, facts frozen at approval, certificate number), the fit behind it (its report and
 * settings, never edited after approval), the session (metadata and poses, stored once) and the nominal
 * revision (never edited). No clock, no random numbers: the same set gives the same bytes each time.
 */
import { allFitPoses } from './fit-poses';
import { eq } from 'drizzle-orm';
import { fits, sessionPoses, sessions } from '../../db/schema';
import { forwardPoint } from '../engine/kinematics';
import { iso9283, repeatGroups } from '../engine/iso9283';
import type { AccuracyMap } from '../engine/accuracy-map';
import type { FitReport } from '../engine/fit';
import type { ErrorStats } from '../engine/types';
import { SAFETY_CAUTION } from '../shared/safety';
import { config } from './config';
import type { CertificateInput, IsoFigures } from './certificate-pdf';
import { db as sharedDb, type Db } from './db';
import { buildFiles, CERTIFICATE_FILE, certificateNumber, loadSet, logExport, type ExportActor, type SetRow } from './parameter-set-files';
import { runReport } from './engine-runner';
import { MAP_OPTIONS } from './report-tasks';

const emptyStats: ErrorStats = { n: 0, rms: NaN, mean: NaN, max: NaN, p95: NaN };

/** Everything the certificate of one set states, or undefined when there is no such set. */
export async function certificateInput(setId: string, database: Db = sharedDb()): Promise<CertificateInput | undefined> {
  const s = await loadSet(setId, database);
  if (!s) return undefined;
  return certificateInputFor(s, database);
}

export async function certificateInputFor(s: SetRow, database: Db = sharedDb()): Promise<CertificateInput> {
  const [row] = await database
    .select({ fit: fits, session: sessions })
    .from(fits)
    .innerJoin(sessions, eq(sessions.id, fits.sessionId))
    .where(eq(fits.id, s.fitId));
  const fit = row!.fit, session = row!.session;
  const report = (fit.report ?? {}) as Partial<FitReport>;
  const stats = report.statistics;
  const params = report.parameters ?? [];
  // The per-pose part lives in fit_poses (reports stored before the split carry it inline).
  const poses = report.poses ?? (await allFitPoses(s.fitId, database));

  // ISO 9283 position accuracy and repeatability from the session's repeated poses (a handful of groups).
  let iso: IsoFigures | null = null;
  if (session.repeatGroups > 0) {
    const rows = await database.select().from(sessionPoses).where(eq(sessionPoses.sessionId, session.id)).orderBy(sessionPoses.idx);
    const nominalInFrame = s.nominal.base ? s.nominal : { ...s.nominal, base: s.geometry.base };
    const after = iso9283(repeatGroups(rows, (q) => forwardPoint(s.geometry, q)));
    const before = iso9283(repeatGroups(rows, (q) => forwardPoint(nominalInFrame, q)));
    if (after.poses.length) iso = { repeatedPoses: after.poses.length, apBeforeMm: before.ap, apAfterMm: after.ap, apPose: after.apPose, rpMm: after.rp, rpPose: after.rpPose };
  }

  const files = buildFiles(s).map((f) => ({ name: f.name, bytes: f.bytes.length, sha256: f.sha256 }));
  const approvedAt = new Date(s.approvedAt).toISOString();
  const fourEyesRule = config().FOUR_EYES;
  return {
    certificateNo: certificateNumber(s),
    set: { id: s.setId, version: s.version, approvedAt, comment: s.comment },
    unit: { serial: s.serial, site: s.frozen.site, cell: s.frozen.cell },
    model: { name: s.modelName, manufacturer: s.frozen.manufacturer, revision: s.revision },
    company: process.env.OFFSETRY_ISSUER || 'Offsetry',
    sessions: [
      {
        measuredOn: session.measuredOn,
        technician: session.technician,
        instrument: session.instrument,
        statedUncertainty: session.instrumentUncertainty || null,
        ambientC: session.ambientC,
        target: session.target,
        fileName: session.fileName,
        fileSha256: session.fileSha256,
        poseCount: session.poseCount,
        repeatGroups: session.repeatGroups,
      },
    ],
    method: {
      convention: s.geometry.convention,
      groups: report.options?.groups ?? [],
      registration: report.registration ?? { registered: false, rmsMm: null },
      robust: report.options?.robust ?? 'none',
      holdout: report.options?.holdout ?? 0,
      kFold: report.options?.kFold ?? 0,
      engineVersion: s.engineVersion ?? 'unknown',
      iterations: report.iterations?.length ?? 0,
      stopReason: report.stopReason ?? 'not recorded',
      fitPoses: poses.filter((p) => p.role === 'fit').length,
      holdoutPoses: poses.filter((p) => p.role === 'holdout').length,
      excludedPoses: poses.filter((p) => p.role === 'excluded').length,
    },
    results: {
      fit: stats?.fit ?? { before: emptyStats, after: emptyStats },
      holdout: stats?.holdout ?? null,
      crossValidation: stats?.crossValidation ? { k: stats.crossValidation.k, rms: stats.crossValidation.rms } : null,
      iso,
    },
    residuals: poses.map((p) => ({ label: p.label, role: p.role, before: p.errorBefore, after: p.errorAfter })),
    parameters: params
      .filter((p) => typeof p.calibrated === 'number')
      .map((p) => ({ key: p.key, group: p.group, unit: p.unit, nominal: p.nominal, calibrated: p.calibrated, change: p.change, standardError: p.standardError, status: p.status, reason: p.reason })),
    approvals: {
      runBy: s.frozen.runByName,
      submittedBy: s.frozen.submittedByName,
      submittedAt: fit.submittedAt ? new Date(fit.submittedAt).toISOString() : null,
      approvedBy: s.approverName,
      approvedAt,
      fourEyesRule,
      fourEyesMet: fit.createdBy !== s.approvedById && fit.submittedBy !== s.approvedById,
    },
    files,
    nominal: s.nominal,
    calibrated: s.geometry,
    mapOptions: { ...MAP_OPTIONS },
    safety: SAFETY_CAUTION,
  };
}

/** The PDF bytes of a set's certificate (drawn off the request thread). */
export async function renderCertificateFor(s: SetRow, database: Db = sharedDb()): Promise<Uint8Array> {
  const input = await certificateInputFor(s, database);
  const bytes = await runReport<Uint8Array>({ kind: 'certificate', input });
  return bytes instanceof Uint8Array ? bytes : new Uint8Array(bytes as ArrayLike<number>);
}

/** The certificate of one set as a download, logged in the export log; undefined when there is no such set. */
export async function certificateDownload(setId: string, actor: ExportActor, database: Db = sharedDb()) {
  const s = await loadSet(setId, database);
  if (!s) return undefined;
  const bytes = await renderCertificateFor(s, database);
  await logExport(database, actor, 'single', 'certificate', [s]);
  return { bytes, fileName: `${s.serial}-v${s.version}-${CERTIFICATE_FILE}`, certificateNo: certificateNumber(s) };
}

/** The before/after accuracy map of a set (computed off the request thread); undefined when there is no such set. */
export async function accuracyMapOf(setId: string, database: Db = sharedDb()): Promise<(AccuracyMap & { parameterSetId: string; version: number }) | undefined> {
  const s = await loadSet(setId, database);
  if (!s) return undefined;
  const map = await runReport<AccuracyMap>({ kind: 'accuracy-map', nominal: s.nominal, calibrated: s.geometry });
  return { parameterSetId: s.setId, version: s.version, ...map };
}
